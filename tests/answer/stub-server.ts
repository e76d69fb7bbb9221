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
      const send = (): void => {
        if (res.destroyed) return;
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
