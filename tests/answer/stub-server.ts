// An in-process HTTP server speaking the chat-completions protocol from a script of replies.

import { createServer, type IncomingMessage, type Server } from 'node:http';
import type { AddressInfo } from 'node:net';

export interface StubReply {
  status?: number;
  headers?: Record<string, string>;
  /** A string is sent as is; anything else as JSON. */
  body?: unknown;
  /**
   * Reply only once this settles: lets a test hold the endpoint "busy" for exactly as long as it needs (until
   * a client gave up, a server started shutting down), rather than for a delay that assumes a machine speed.
   * `NEVER` models an endpoint that never answers.
   */
  replyWhen?: Promise<unknown>;
  /**
   * Reply as a server-sent event stream instead: each string is one event's data (send
   * '[DONE]' yourself to end properly). Ignores `body`.
   */
  events?: string[];
  /** Pause between stream events. */
  eventGapMs?: number;
  /** After this many events, hold the stream open (sending nothing) until `resumeWhen` settles. */
  pauseAfter?: number;
  /** See `pauseAfter`; `NEVER` gives a stream that stalls for good. */
  resumeWhen?: Promise<unknown>;
  /** Destroy the connection after this many events (a stream cut mid-way). */
  cutAfter?: number;
}

export interface SeenRequest {
  method: string;
  url: string;
  headers: IncomingMessage['headers'];
  body: unknown;
}

/** A promise that never settles: a reply or stream held with it never comes. */
export const NEVER: Promise<never> = new Promise<never>(() => undefined);

/** A promise the test settles itself, e.g. as a stub's `replyWhen` or `resumeWhen`. */
export function gate(): { promise: Promise<void>; open(): void } {
  let open!: () => void;
  const promise = new Promise<void>((r) => (open = r));
  return { promise, open };
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
  // Pending stream timers, cleared on close so none fires into a closed server.
  const timers = new Set<NodeJS.Timeout>();
  const later = (fn: () => void, ms: number): void => {
    const t = setTimeout(() => {
      timers.delete(t);
      fn();
    }, ms);
    timers.add(t);
  };
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
        let paused = false;
        const next = (): void => {
          if (res.destroyed) return;
          if (reply.cutAfter !== undefined && k >= reply.cutAfter) {
            res.destroy();
            return;
          }
          if (!paused && reply.pauseAfter !== undefined && k === reply.pauseAfter && reply.resumeWhen) {
            paused = true;
            void reply.resumeWhen.then(next, next);
            return;
          }
          const data = events[k++];
          if (data === undefined) {
            res.end();
            return;
          }
          res.write(`data: ${data}\n\n`);
          later(next, reply.eventGapMs ?? 0);
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
      if (reply.replyWhen) void reply.replyWhen.then(send, send);
      else send();
    });
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(0, '127.0.0.1', resolve);
  });
  const { port } = server.address() as AddressInfo;
  return {
    baseUrl: `http://127.0.0.1:${port}/v1`,
    seen,
    close: () =>
      new Promise<void>((resolve) => {
        for (const t of timers) clearTimeout(t);
        timers.clear();
        server.closeAllConnections();
        server.close(() => resolve());
      }),
  };
}
