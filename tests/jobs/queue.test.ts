import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { hostname, tmpdir } from 'node:os';
import { REINDEX_LEASE, requeueAbandoned, thisProcess, withReindexLock } from '../../src/jobs/index.js';
import { silentLogger } from '../../src/logger.js';
import { createDocumentApi, createRuntime, ingestAsJob, jobContext } from '../../src/runtime.js';
import { openStore, storePaths } from '../../src/store/index.js';
import { tempRuntime, rawDb } from '../fixtures/runtime.js';
import { runSync, withDeadline } from '../fixtures/wait.js';

const cleanups: (() => void | Promise<void>)[] = [];
/** The queue's own idle() resolves at once when nothing is pending; the deadline names the wait if a job hangs. */
const idle = (queue: { idle(): Promise<void> }) => withDeadline(queue.idle(), { what: 'the job queue to finish its jobs', timeoutMs: 20_000 });
/** A lease length for jobs the tests start by hand (the default of `limits.jobLeaseSeconds`). */
const LEASE_MS = 60_000;
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
    const gone = { pid: deadPid(), host: hostname(), holder: 'holder-that-crashed' };
    const a = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    const b = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    const live = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' }); // held by this process, still running
    const cli = rt.jobs.create('ingest', 'c', { path: '/x' }); // a CLI run: not the queue's to resume
    for (const j of [a, b, cli]) rt.jobs.start(j.id, gone, LEASE_MS);
    rt.jobs.start(live.id, thisProcess(), LEASE_MS);
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
    const gone = { pid: deadPid(), host: hostname(), holder: 'holder-that-crashed' };
    // As a crashed `sourcebound ingest` leaves its job: running, held by a process that no longer exists.
    const crashed = rt.jobs.create('ingest', 'c', { path: '/docs' });
    rt.jobs.start(crashed.id, gone, LEASE_MS);
    const running = rt.jobs.create('ingest', 'c', { path: '/other' });
    rt.jobs.start(running.id, thisProcess(), LEASE_MS);
    const remote = rt.jobs.create('reindex', 'c', {});
    rt.jobs.start(remote.id, { pid: gone.pid, host: `not-${hostname()}`, holder: 'holder-on-another-host' }, LEASE_MS); // another host's: cannot be checked
    const legacy = rt.jobs.create('reindex', 'c', {});
    rt.jobs.start(legacy.id, gone, LEASE_MS);
    rawDb(rt)
      .prepare('UPDATE jobs SET owner_pid = NULL, owner_host = NULL, lease_holder = NULL, heartbeat_at = NULL, lease_expires_at = NULL WHERE id = ?')
      .run(legacy.id); // written before owners
    const queued = rt.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    rt.jobs.start(queued.id, gone, LEASE_MS); // the queue's: put back by the server, not failed
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
  it('makes a second concurrent re-index fail with a clear message, and is free again once the first ends', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const deps = { leases: rt.store.leases, leaseMs: LEASE_MS };
    let release!: () => void;
    const first = withReindexLock({ ...deps, owner: thisProcess() }, () => new Promise<void>((r) => (release = r)));
    const other = { pid: process.pid, host: hostname(), holder: 'another-holder' };
    await expect(withReindexLock({ ...deps, owner: other }, async () => 1)).rejects.toMatchObject({
      code: 'SB_ERR_REINDEX_RUNNING',
      message: expect.stringContaining(`process ${process.pid} on ${hostname()}`),
    });
    release();
    await first;
    expect(rt.store.leases.get(REINDEX_LEASE)).toBeNull();
    expect(await withReindexLock({ ...deps, owner: other }, async () => 2)).toBe(2);
  });

  it('is taken over once the lease of a holder that died has expired (a clock the test moves, no waiting)', async () => {
    const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-lease-'));
    cleanups.push(() => rmSync(dataDir, { recursive: true, force: true }));
    let now = Date.parse('2026-03-01T09:00:00.000Z');
    const store = openStore(storePaths(dataDir).database, { clock: () => new Date(now) });
    cleanups.push(() => store.close());
    // A holder that took the lease and then crashed: it never renews nor releases it. Its process id is this
    // live process's, as when the id of a dead process has been given to another: only the lease can tell.
    const crashed = { pid: process.pid, host: hostname(), holder: 'holder-that-crashed' };
    expect(store.leases.acquire(REINDEX_LEASE, crashed, LEASE_MS).acquired).toBe(true);
    const next = { leases: store.leases, owner: thisProcess(), leaseMs: LEASE_MS };
    now += LEASE_MS - 1; // still within its lease
    await expect(withReindexLock(next, async () => 'ran')).rejects.toMatchObject({ code: 'SB_ERR_REINDEX_RUNNING' });
    now += 1; // the lease has expired
    let heldWhileRunning: string | undefined;
    expect(
      await withReindexLock(next, async () => {
        heldWhileRunning = store.leases.get(REINDEX_LEASE)?.owner.holder;
        return 'ran';
      }),
    ).toBe('ran');
    expect(heldWhileRunning).toBe(thisProcess().holder);
    expect(store.leases.get(REINDEX_LEASE)).toBeNull();
  });

  it('is taken over at once when its holder was a process of this host that has ended', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const crashed = { pid: deadPid(), host: hostname(), holder: 'holder-that-crashed' };
    expect(rt.store.leases.acquire(REINDEX_LEASE, crashed, LEASE_MS).acquired).toBe(true);
    expect(await withReindexLock({ leases: rt.store.leases, owner: thisProcess(), leaseMs: LEASE_MS }, async () => 'ran')).toBe('ran');
  });

  it('lets `sourcebound reindex` proceed past a lease a dead holder left, once it has expired', async () => {
    const { rt, config, cleanup } = await tempRuntime({ limits: { jobLeaseSeconds: 60 } });
    cleanups.push(cleanup);
    const crashed = { pid: process.pid, host: `not-${hostname()}`, holder: 'holder-that-crashed' };
    // Taken as if an hour ago, so it expired 59 minutes ago: the holder stopped renewing it when it died.
    const earlier = openStore(storePaths(config.dataDir).database, { clock: () => new Date(Date.now() - 3_600_000) });
    expect(earlier.leases.acquire(REINDEX_LEASE, crashed, 60_000).acquired).toBe(true);
    earlier.close();
    const job = await ingestAsJob(rt, 'reindex', null, {}, () =>
      withReindexLock({ leases: rt.store.leases, owner: thisProcess(), leaseMs: LEASE_MS }, () => rt.ingestor.reindex({})),
    );
    expect(job.documents.failed).toBe(0);
    expect(rt.store.leases.get(REINDEX_LEASE)).toBeNull();
  });
});

describe('job leases', () => {
  it('count a running job as abandoned once its lease expires unrenewed, even when its process id is alive', async () => {
    const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-lease-'));
    cleanups.push(() => rmSync(dataDir, { recursive: true, force: true }));
    let now = Date.parse('2026-03-01T09:00:00.000Z');
    const store = openStore(storePaths(dataDir).database, { clock: () => new Date(now) });
    cleanups.push(() => store.close());
    const alive = (): boolean => false; // every owner's process looks alive: only the lease decides
    const reason = (): string => 'abandoned: lease expired';
    const stale = store.jobs.create('ingest', 'c', { path: '/docs' });
    store.jobs.start(stale.id, { pid: process.pid, host: hostname(), holder: 'holder-that-crashed' }, LEASE_MS);
    const beating = store.jobs.create('ingest', 'c', { path: '/more' });
    store.jobs.start(beating.id, { pid: process.pid, host: hostname(), holder: 'holder-that-beats' }, LEASE_MS);
    const remote = store.jobs.create('reindex', null, { kind: 'reindex', via: 'api' });
    store.jobs.start(remote.id, { pid: 1, host: `not-${hostname()}`, holder: 'server-on-another-host' }, LEASE_MS);

    now += LEASE_MS / 2;
    expect(store.jobs.renewLeases('holder-that-beats', LEASE_MS)).toBe(1);
    expect(store.jobs.failAbandoned(alive, reason)).toBe(0);
    now += LEASE_MS / 2; // the first two leases were taken LEASE_MS ago: both are due, one was renewed
    expect(store.jobs.failAbandoned(alive, reason)).toBe(1);
    expect(store.jobs.get(stale.id)).toMatchObject({ state: 'failed', error: 'abandoned: lease expired' });
    expect(store.jobs.get(beating.id)!.state).toBe('running');
    // The other host's server job goes back to the queue, which cannot check a process there.
    expect(store.jobs.requeueAbandoned(alive, 3)).toBe(1);
    expect(store.jobs.get(remote.id)!.state).toBe('queued');
  });
});

/** The pid of a process that has ended: run to completion before its pid is used. */
function deadPid(): number {
  return runSync(process.execPath, ['-e', '0'], { what: 'a process that exits at once' }).pid!;
}
