import { spawn } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { CLI, ROOT } from '../fixtures/serve.js';
import { collect, waitFor } from '../fixtures/wait.js';

// `npm start` runs `node dist/cli.js serve` and, when npm itself is sent SIGTERM, does not pass the
// signal on: the server used to keep its port after npm was gone. A launcher that behaves the same
// way (spawns serve, dies on SIGTERM without forwarding it) stands in for npm here.

const dirs: string[] = [];
const strays: number[] = [];

afterAll(() => {
  for (const pid of strays) if (alive(pid)) process.kill(pid, 'SIGKILL');
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

function alive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch {
    return false;
  }
}

async function launch(env: Record<string, string>): Promise<{ serverPid: number; output: () => string; killLauncher: () => void }> {
  const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-launcher-'));
  dirs.push(dataDir);
  const script = `const c = require('node:child_process').spawn(process.execPath, [${JSON.stringify(CLI)}, 'serve'], { stdio: ['ignore', 'inherit', 'inherit'] }); console.log('server pid ' + c.pid);`;
  const launcher = spawn(process.execPath, ['-e', script], {
    cwd: ROOT,
    env: { ...process.env, PORT: '0', HOST: '127.0.0.1', SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_DATA_DIR: dataDir, ...env },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  const out = collect(launcher);
  const serverPid = await waitFor(() => Number(/server pid (\d+)/.exec(out.output())?.[1]) || null, { what: 'the launcher to start serve', detail: out.output });
  strays.push(serverPid);
  await waitFor(() => /ready on http/.test(out.output()), { what: 'serve to be ready', timeoutMs: 90_000, detail: out.output });
  return { serverPid, output: out.output, killLauncher: () => launcher.kill('SIGTERM') };
}

describe('a server started by an npm script', () => {
  it('stops when its launcher is gone, as it would on SIGTERM', async () => {
    const s = await launch({ npm_lifecycle_event: 'start' });
    s.killLauncher();
    // Gone, and its last log line read (the pipe it writes to outlives the launcher).
    await waitFor(() => !alive(s.serverPid) && /stopped/.test(s.output()), { what: `serve (pid ${s.serverPid}) to stop after its launcher`, timeoutMs: 30_000, detail: s.output });
    expect(s.output()).toMatch(/shutting down.*|launcher exited/);
    expect(s.output()).toMatch(/launcher exited/);
  }, 120_000);
});
