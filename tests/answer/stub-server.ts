// An in-process HTTP server speaking the chat-completions protocol from a script of replies.

import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';

export interface StubReply {
  status?: number;
  headers?: Record<string, string>;
  /** A string is sent as is; anything else as JSON. */
  body?: unknown;
  /** Wait this long before replying. */
  delayMs?: number;
  /**
   * Reply as a server-sent event stream instead: each string is one event's data (send
   * '[DONE]' yourself to end properly). Ignores `body`.
   */
  events?: string[];
  /** Pause between stream events. */
  eventGapMs?: number;
  /** Destroy the connection after this many events (a stream cut mid-way). */
  cutAfter?: number;
}

export interface SeenRequest {
  method: string;
  url: string;
  headers: IncomingMessage['headers'];
  body: unknown;
}

export interface StubServer {
  baseUrl: string;
  seen: SeenRequest[];
  close(): Promise<void>;
}

/** A reply in the protocol's success shape. */
export function okReply(content: string): StubReply {
  return { body: { id: 'x', object: 'chat.completion', choices: [{ index: 0, message: { role: 'assistant', content }, finish_reason: 'stop' }] } };
}

/** Stream events in the protocol's delta shape, ending with [DONE]. */
export function streamReply(pieces: string[], over: Partial<StubReply> = {}): StubReply {
  const events = pieces.map((content) => JSON.stringify({ id: 'x', object: 'chat.completion.chunk', choices: [{ index: 0, delta: { content }, finish_reason: null }] }));
  events.push('[DONE]');
  return { events, ...over };
}

/** Serves `replies` in order; the last one repeats once the script runs out. */
export async function startStub(replies: StubReply[]): Promise<StubServer> {
  const seen: SeenRequest[] = [];
  let i = 0;
  const server: Server = createServer((req, res) => {
    const chunks: Buffer[] = [];
    req.on('data', (c: Buffer) => chunks.push(c));
    req.on('end', () => {
      const raw = Buffer.concat(chunks).toString('utf8');
      let body: unknown = raw;
      try {
        body = JSON.parse(raw);
      } catch {
        // keep the raw text
      }
      seen.push({ method: req.method ?? '', url: req.url ?? '', headers: req.headers, body });
      const reply = replies[Math.min(i++, replies.length - 1)] ?? okReply('');
      const sendEvents = (events: string[]): void => {
        res.writeHead(reply.status ?? 200, { 'content-type': 'text/event-stream', ...reply.headers });
        let k = 0;
        const next = (): void => {
          if (res.destroyed) return;
          if (reply.cutAfter !== undefined && k >= reply.cutAfter) {
            res.destroy();
            return;
          }
          const data = events[k++];
          if (data === undefined) {
            res.end();
            return;
          }
          res.write(`data: ${data}\n\n`);
          setTimeout(next, reply.eventGapMs ?? 0);
        };
        next();
      };
      const send = (): void => {
        if (res.destroyed) return;
        if (reply.events) {
          sendEvents(reply.events);
          return;
        }
        const payload = typeof reply.body === 'string' ? reply.body : JSON.stringify(reply.body ?? {});
        res.writeHead(reply.status ?? 200, { 'content-type': 'application/json', ...reply.headers });
        res.end(payload);
      };
      if (reply.delayMs) setTimeout(send, reply.delayMs);
      else send();
    });
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const { port } = server.address() as AddressInfo;
  return {
    baseUrl: `http://127.0.0.1:${port}/v1`,
    seen,
    close: () =>
      new Promise<void>((resolve) => {
        server.closeAllConnections();
        server.close(() => resolve());
      }),
  };
}
