import { readdirSync, readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { hostname } from 'node:os';
import { requeueAbandoned, thisProcess, withReindexLock } from '../../src/jobs/index.js';
import { silentLogger } from '../../src/logger.js';
import { createDocumentApi, createRuntime, jobContext } from '../../src/runtime.js';
import { tempRuntime, rawDb } from '../fixtures/runtime.js';
import { runSync, withDeadline } from '../fixtures/wait.js';

const cleanups: (() => void | Promise<void>)[] = [];
/** The queue's own idle() resolves at once when nothing is pending; the deadline names the wait if a job hangs. */
const idle = (queue: { idle(): Promise<void> }) => withDeadline(queue.idle(), { what: 'the job queue to finish its jobs', timeoutMs: 20_000 });
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

describe('the job queue', () => {
  it('runs an upload in a worker thread, and the main thread then finds the document', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const { queue, documents: docs } = createDocumentApi(rt, 'thread');
    cleanups.push(() => queue.close());
    const out = await docs.upload('c', 'tram-wifi.md', new TextEncoder().encode('# Wifi\n\nFree wifi is available on every tram in the Brackenfold fleet.'));
    expect(out.status).toBe('queued');
    await idle(queue);
    const job = rt.jobs.get(out.status === 'queued' ? out.job.id : '')!;
    expect(job.state).toBe('succeeded');
    const hits = await rt.retriever.search({ query: 'wifi Brackenfold', collection: 'c', k: 3, mode: 'hybrid' });
    expect(hits[0]!.source).toBe('tram-wifi.md');
  });

  it('runs a full re-index in the worker thread at low priority, and the main thread switches to the new index', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const { queue, documents: docs } = createDocumentApi(rt, 'thread');
    cleanups.push(() => queue.close());
    for (const [name, text] of [
      ['tram-wifi.md', '# Wifi\n\nFree wifi is available on every tram in the Brackenfold fleet.'],
      ['night-buses.md', '# Night buses\n\nNight buses leave Marrowgate bus station every 30 minutes after midnight.'],
    ] as const) {
      await docs.upload('c', name, new TextEncoder().encode(text));
      await idle(queue);
    }
    expect((await rt.retriever.search({ query: 'wifi Brackenfold', collection: 'c', k: 3, mode: 'dense' }))[0]!.source).toBe('tram-wifi.md');
    const before = rt.repo.chunksOfCollection('c').map((c) => c.id);
    // Linux keeps a nice value per thread: the job thread runs at 10, the request thread stays at 0.
    if (process.platform === 'linux') {
      const nice = readdirSync('/proc/self/task').map((t) => Number(readFileSync(`/proc/self/task/${t}/stat`, 'utf8').split(') ')[1]!.split(' ')[16]));
      expect(nice).toContain(10);
      expect(nice[0]).toBe(0);
    }
    const job = docs.reindex({ collection: 'c', full: true });
    await idle(queue);
    expect(rt.jobs.get(job.id)).toMatchObject({ state: 'succeeded', result: { documents: { updated: 2, failed: 0 } } });
    const after = rt.repo.chunksOfCollection('c').map((c) => c.id);
    expect(after.some((id) => before.includes(id))).toBe(false); // every chunk was rebuilt
    expect(rt.indexes.sync('c', { persist: false })).toMatchObject({ rebuilt: false, added: 0, size: after.length });
    const hits = await rt.retriever.search({ query: 'wifi Brackenfold', collection: 'c', k: 3, mode: 'dense' });
    expect(hits[0]!.source).toBe('tram-wifi.md');
    expect(after).toContain(hits[0]!.chunkId);
  });

  it('puts jobs left running by a dead process back in the queue, and gives up after 3 attempts', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const gone = { pid: deadPid(), host: hostname() };
    const a = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    const b = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    const live = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' }); // held by this process, still running
    const cli = rt.jobs.create('ingest', 'c', { path: '/x' }); // a CLI run: not the queue's to resume
    for (const j of [a, b, cli]) rt.jobs.start(j.id, gone);
    rt.jobs.start(live.id, thisProcess());
    rawDb(rt).prepare('UPDATE jobs SET attempts = 3 WHERE id = ?').run(b.id);
    expect(requeueAbandoned(jobContext(rt))).toBe(1);
    expect(rt.jobs.get(a.id)!.state).toBe('queued');
    expect(rt.jobs.get(b.id)).toMatchObject({ state: 'failed', error: 'gave up after 3 attempts' });
    expect(rt.jobs.get(live.id)!.state).toBe('running');
    expect(rt.jobs.get(cli.id)!.state).toBe('running');
  });

  it('fails, when a command opens the store, a job left running by a process that is gone, and leaves a live one alone', async () => {
    const { rt, config, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const gone = { pid: deadPid(), host: hostname() };
    // As a crashed `sourcebound ingest` leaves its job: running, held by a process that no longer exists.
    const crashed = rt.jobs.create('ingest', 'c', { path: '/docs' });
    rt.jobs.start(crashed.id, gone);
    const running = rt.jobs.create('ingest', 'c', { path: '/other' });
    rt.jobs.start(running.id, thisProcess());
    const remote = rt.jobs.create('reindex', 'c', {});
    rt.jobs.start(remote.id, { pid: gone.pid, host: `not-${hostname()}` }); // another host's: cannot be checked
    const legacy = rt.jobs.create('reindex', 'c', {});
    rt.jobs.start(legacy.id, gone);
    rawDb(rt).prepare('UPDATE jobs SET owner_pid = NULL, owner_host = NULL WHERE id = ?').run(legacy.id); // written before owners
    const queued = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    rt.jobs.start(queued.id, gone); // the queue's: put back by the server, not failed
    expect(rt.jobs.get(crashed.id)!.state).toBe('running');

    const again = await createRuntime(config, silentLogger());
    cleanups.push(() => again.close());
    expect(again.jobs.get(crashed.id)).toMatchObject({ state: 'failed', error: `abandoned: process ${gone.pid} on ${gone.host} ended before the job finished` });
    expect(again.jobs.get(crashed.id)!.finishedAt).not.toBeNull();
    expect(again.jobs.get(legacy.id)).toMatchObject({ state: 'failed', error: 'abandoned: the process that ran it ended before the job finished' });
    expect(again.jobs.get(running.id)!.state).toBe('running');
    expect(again.jobs.get(remote.id)!.state).toBe('running');
    expect(again.jobs.get(queued.id)!.state).toBe('running');
  });
});

describe('the re-index lock', () => {
  it('makes a second concurrent re-index fail with a clear message', async () => {
    const { dataDir, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    let release!: () => void;
    const first = withReindexLock(dataDir, () => new Promise<void>((r) => (release = r)));
    await expect(withReindexLock(dataDir, async () => 1)).rejects.toMatchObject({ code: 'SB_ERR_REINDEX_RUNNING' });
    release();
    await first;
    expect(await withReindexLock(dataDir, async () => 2)).toBe(2);
  });

  it('takes over a stale lock left by a process that died', async () => {
    const { dataDir, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    // Run to completion before its pid is used, so the pid belongs to a process that has ended.
    const dead = runSync(process.execPath, ['-e', '0'], { what: 'a process that exits at once' });
    const { hostname } = await import('node:os');
    writeFileSync(path.join(dataDir, 'reindex.lock'), JSON.stringify({ pid: dead.pid, host: hostname(), since: '2026-01-01T00:00:00Z' }));
    expect(await withReindexLock(dataDir, async () => 'ran')).toBe('ran');
  });
});

/** The pid of a process that has ended: run to completion before its pid is used. */
function deadPid(): number {
  return runSync(process.execPath, ['-e', '0'], { what: 'a process that exits at once' }).pid!;
}
