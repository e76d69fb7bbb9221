import { request } from 'node:http';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { removeStaleIncoming } from '../../src/jobs/index.js';
import { openStore, storePaths } from '../../src/store/index.js';
import { startServe, type ServeProcess } from '../fixtures/serve.js';
import { waitFor } from '../fixtures/wait.js';

// An upload is received into `uploads/<collection>/.incoming-<id>` and renamed into place only when complete.
// A server killed while receiving one leaves that file behind, with no job for it: the next start removes it.

const dirs: string[] = [];
const servers: ServeProcess[] = [];
afterEach(async () => {
  for (const s of servers.splice(0)) await s.stop();
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

const incoming = (dir: string, collection: string): string[] => {
  const folder = path.join(dir, 'uploads', collection);
  return existsSync(folder) ? readdirSync(folder).filter((n) => n.startsWith('.incoming-')) : [];
};

describe('half-received uploads', () => {
  it('are removed when the server starts again after it was SIGKILLed mid-upload, and no job is left running', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-partial-'));
    dirs.push(dir);
    const first = await startServe({ SOURCEBOUND_DATA_DIR: dir });
    servers.push(first);
    // A multipart upload that declares 256 KiB and sends only its first 64 KiB, then stalls.
    const boundary = 'sb-partial-boundary';
    const head = `--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="timetable.md"\r\nContent-Type: text/markdown\r\n\r\n`;
    const url = new URL('/v1/collections/timetables/documents', first.base);
    const req = request(url, {
      method: 'POST',
      headers: { 'content-type': `multipart/form-data; boundary=${boundary}`, 'content-length': String(256 * 1024) },
    });
    req.on('error', () => undefined); // the server is killed under it
    req.write(head + '# Route 7\n\n' + 'The tram leaves Brackenfold depot every ten minutes. '.repeat(1200).slice(0, 64 * 1024));
    await waitFor(() => incoming(dir, 'timetables').length === 1 || null, {
      what: 'the server to start receiving the upload into an .incoming- file',
      timeoutMs: 20_000,
      detail: () => first.output(),
    });
    await first.stop(); // SIGKILL
    req.destroy();
    expect(incoming(dir, 'timetables')).toHaveLength(1);

    const second = await startServe({ SOURCEBOUND_DATA_DIR: dir });
    servers.push(second);
    expect(incoming(dir, 'timetables')).toEqual([]);
    expect(second.output()).toContain('removed uploads left half-received by a server that stopped');
    const store = openStore(storePaths(dir).database, { readonly: true });
    try {
      expect(store.jobs.counts().filter((c) => c.state === 'running' || c.state === 'queued')).toEqual([]);
    } finally {
      store.close();
    }
  }, 120_000);

  it('that a process started after they were last written is receiving are left alone', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-partial-'));
    dirs.push(dir);
    const folder = path.join(dir, 'uploads', 'timetables');
    mkdirSync(folder, { recursive: true });
    const stale = path.join(folder, '.incoming-stale');
    const live = path.join(folder, '.incoming-live');
    const kept = path.join(folder, 'route-7.md');
    for (const f of [stale, live, kept]) writeFileSync(f, 'text');
    const start = Date.now();
    const hourAgo = new Date(start - 3_600_000);
    for (const f of [stale, kept]) utimesSync(f, hourAgo, hourAgo);
    expect(removeStaleIncoming(dir, start - 60_000)).toEqual([stale]);
    expect(readdirSync(folder).sort()).toEqual(['.incoming-live', 'route-7.md']);
    expect(removeStaleIncoming(path.join(dir, 'no-such-folder'), start)).toEqual([]);
  });
});
