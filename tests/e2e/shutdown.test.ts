import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { gate, okReply, startStub, type StubServer } from '../answer/stub-server.js';
import { startServe, type ServeProcess } from '../fixtures/serve.js';
import { waitFor, withDeadline } from '../fixtures/wait.js';

// Graceful shutdown, seen from outside: SIGTERM while an answer is in flight (held up by a completion
// endpoint that answers only once the server has begun shutting down) lets that answer finish, then the
// process refuses new connections and exits 0.

const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-shutdown-'));
let stub: StubServer | undefined;
let server: ServeProcess | undefined;

afterAll(async () => {
  await server?.stop();
  await stub?.close();
  rmSync(dataDir, { recursive: true, force: true });
});

describe('SIGTERM', () => {
  it('finishes the request in flight, then stops accepting and exits 0', async () => {
    const completionReply = gate();
    stub = await startStub([{ ...okReply('Found items are kept for 30 days. [1]'), replyWhen: completionReply.promise }]);
    server = await startServe({ SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_COMPLETION_URL: stub.baseUrl });
    const { child, base, output } = server;

    const inFlight = fetch(`${base}/v1/answer`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ question: 'How long are found items kept by the Lost Property Office?' }),
    });
    inFlight.catch(() => undefined); // awaited below; this only keeps an early failure of a wait from going unhandled
    // Wait until the answer is waiting on the completion endpoint, then ask the server to stop.
    await waitFor(() => stub!.seen.length > 0, { what: 'the answer to reach the completion endpoint', detail: output });
    child.kill('SIGTERM');
    // The endpoint answers only once the server says it is shutting down, so the answer is in flight across
    // the signal on any machine, however long the signal takes to be handled.
    await waitFor(() => output().includes('shutting down: finishing in-flight requests'), { what: 'serve to log that it is shutting down', detail: output });
    completionReply.open();

    const res = await withDeadline(inFlight, { what: 'the in-flight answer to come back after SIGTERM', detail: output });
    expect(res.status).toBe(200);
    // The reply came through the completion endpoint, so it was really in flight across the signal.
    const body = (await res.json()) as { mode: string; caution: string };
    expect(body.mode).toBe('generative');
    expect(body.caution).toBeTruthy();
    // Not a speed target: a kept-alive client socket once held the exit for the whole keep-alive timeout
    // (72 s in fastify); the reply now closes its connection while the server is closing.
    expect(await server.exited(30_000)).toEqual({ code: 0, signal: null });
    await expect(fetch(`${base}/health`)).rejects.toThrow();
    expect(output()).toContain('shutting down: finishing in-flight requests');
  }, 90_000);
});
