import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { okReply, startStub, type StubServer } from '../answer/stub-server.js';
import { startServe } from '../fixtures/serve.js';

// Graceful shutdown, seen from outside: SIGTERM while an answer is in flight (held up by a slow completion
// endpoint) lets that answer finish, then the process refuses new connections and exits 0.

const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-shutdown-'));
let stub: StubServer | undefined;

afterAll(async () => {
  await stub?.close();
  rmSync(dataDir, { recursive: true, force: true });
});

describe('SIGTERM', () => {
  it('finishes the request in flight, then stops accepting and exits 0', async () => {
    stub = await startStub([{ ...okReply('Found items are kept for 30 days. [1]'), delayMs: 1500 }]);
    const { child, base, output } = await startServe({ SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_COMPLETION_URL: stub.baseUrl });
    const exited = new Promise<number | null>((r) => child.on('exit', (code) => r(code)));

    const inFlight = fetch(`${base}/v1/answer`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ question: 'How long are found items kept by the Lost Property Office?' }),
    });
    // Wait until the answer is waiting on the completion endpoint, then ask the server to stop.
    while (stub.seen.length === 0) await new Promise((r) => setTimeout(r, 20));
    child.kill('SIGTERM');

    const t0 = Date.now();
    const res = await inFlight;
    expect(res.status).toBe(200);
    // The reply came through the completion endpoint, so it was really in flight across the signal.
    const body = (await res.json()) as { mode: string; caution: string };
    expect(body.mode).toBe('generative');
    expect(body.caution).toBeTruthy();
    expect(await exited).toBe(0);
    // Not a speed target: a kept-alive client socket once held the exit for the whole keep-alive timeout
    // (72 s in fastify); the reply now closes its connection while the server is closing.
    expect(Date.now() - t0).toBeLessThan(30_000);
    await expect(fetch(`${base}/health`)).rejects.toThrow();
    expect(output()).toContain('shutting down: finishing in-flight requests');
  }, 90_000);
});
