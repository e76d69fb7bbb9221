import { spawn } from 'node:child_process';
import { createServer } from 'node:net';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { startStandIn } from '../../src/cli/stand-in.js';
import { collect, waitFor, waitForExit } from '../fixtures/wait.js';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const cleanups: (() => unknown)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

describe('the start-up stand-in', () => {
  it('answers /health, /ready and the API while the main thread is blocked', async () => {
    // A process that starts the stand-in, then blocks its main thread, as a long synchronous schema
    // migration would; it is killed at the end of the test.
    const script = `
      const { startStandIn } = await import(${JSON.stringify(path.join(ROOT, 'dist', 'cli', 'stand-in.js'))});
      const s = await startStandIn('127.0.0.1', 0);
      // Written synchronously: a pipe write would wait for the event loop the next line blocks.
      (await import('node:fs')).writeSync(1, 'port ' + s.port + '\\n');
      Atomics.wait(new Int32Array(new SharedArrayBuffer(4)), 0, 0, 120000);
    `;
    const child = spawn(process.execPath, ['--input-type=module', '-e', script], { stdio: ['ignore', 'pipe', 'pipe'] });
    cleanups.push(async () => {
      child.kill('SIGKILL');
      await waitForExit(child);
    });
    const out = collect(child);
    const port = await waitFor(() => /port (\d+)/.exec(out.stdout())?.[1] ?? null, { what: "the stand-in's port" }).catch((e: Error) => {
      throw new Error(`${e.message}\n${out.output()}`);
    });
    const base = `http://127.0.0.1:${port}`;
    const health = await fetch(`${base}/health`);
    expect(health.status).toBe(200);
    expect(await health.json()).toMatchObject({ status: 'ok', ready: false, starting: true });
    const ready = await fetch(`${base}/ready`);
    expect(ready.status).toBe(503);
    expect(ready.headers.get('retry-after')).toBe('1');
    const search = await fetch(`${base}/v1/search`, { method: 'POST', body: '{}', headers: { 'content-type': 'application/json' } });
    expect(search.status).toBe(503);
    expect(((await search.json()) as { error: { code: string } }).error.code).toBe('SB_ERR_NOT_READY');
  });

  it('gives the port back when closed, and refuses a port that is taken', async () => {
    const s = await startStandIn('127.0.0.1', 0);
    await s.close();
    // The service takes the same port at once.
    const server = createServer();
    await new Promise<void>((resolve, reject) => server.once('error', reject).listen(s.port, '127.0.0.1', resolve));
    cleanups.push(() => new Promise<void>((r) => server.close(() => r())));
    await expect(startStandIn('127.0.0.1', s.port)).rejects.toThrow(/cannot listen/);
  });
});
