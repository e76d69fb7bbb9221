import { mkdtempSync, rmSync } from 'node:fs';
import { hostname, tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { openStore, storePaths, type JobOwner } from '../../src/store/index.js';
import { CLI, startServe, type ServeProcess } from '../fixtures/serve.js';
import { runSync, waitFor } from '../fixtures/wait.js';

// A CLI run or a server that dies (SIGKILL, a power cut) leaves its job `running`. The next command that opens the
// store fails such a job, naming the process that held it; a job held by a process that still runs is left alone,
// and the server puts its own queue's jobs back in the queue instead.

const dirs: string[] = [];
let server: ServeProcess | undefined;
afterEach(async () => {
  await server?.stop();
  server = undefined;
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

/** A process of this host that has ended: run to completion before its pid is used. */
const gone = (): JobOwner => ({
  pid: runSync(process.execPath, ['-e', '0'], { what: 'a process that exits at once' }).pid!,
  host: hostname(),
  holder: 'holder-of-a-process-that-ended',
});

/** A data folder whose store holds jobs as the given owners left them, running. */
function dataDirWith(jobs: { kind: string; payload: Record<string, unknown>; owner: JobOwner }[]): { dir: string; ids: string[] } {
  const dir = mkdtempSync(path.join(tmpdir(), 'sb-abandoned-'));
  dirs.push(dir);
  const store = openStore(storePaths(dir).database);
  try {
    const ids = jobs.map((j) => {
      const job = store.jobs.create(j.kind, 'default', j.payload);
      store.jobs.start(job.id, j.owner, 60_000);
      return job.id;
    });
    return { dir, ids };
  } finally {
    store.close();
  }
}

/** Every job of the data folder's store, by id (read on a read-only connection, beside a running server). */
function jobsIn(dir: string): Map<string, { state: string; error: string | null; attempts: number }> {
  const store = openStore(storePaths(dir).database, { readonly: true });
  try {
    const ids = store.db.prepare('SELECT id FROM jobs').pluck().all() as string[];
    return new Map(ids.map((id) => [id, store.jobs.get(id)!]));
  } finally {
    store.close();
  }
}

describe('jobs left running by a process that is gone', () => {
  it('are failed when `sourcebound reindex` opens the store; a job of a live process stays running', () => {
    const dead = gone();
    const { dir, ids } = dataDirWith([
      { kind: 'ingest', payload: { path: '/docs' }, owner: dead },
      { kind: 'ingest', payload: { path: '/more' }, owner: { pid: process.pid, host: hostname(), holder: 'holder-of-this-process' } },
    ]);
    const [crashed, live] = ids as [string, string];
    const r = runSync(process.execPath, [CLI, 'reindex', '--json'], {
      env: { ...process.env, SOURCEBOUND_DATA_DIR: dir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'warn' },
      what: 'sourcebound reindex',
    });
    expect(r.status, r.stderr).toBe(0);
    expect(r.stderr).toContain('jobs left running by a process that ended were marked failed');
    const after = jobsIn(dir);
    expect(after.get(crashed)).toMatchObject({ state: 'failed', error: `abandoned: process ${dead.pid} on ${dead.host} ended before the job finished` });
    expect(after.get(live)!.state).toBe('running');
  });

  it('are failed when `sourcebound serve` starts, and its queue\'s own job is run again', async () => {
    const dead = gone();
    const { dir, ids } = dataDirWith([
      { kind: 'ingest', payload: { path: '/docs' }, owner: dead },
      { kind: 'reindex', payload: { kind: 'reindex', via: 'api' }, owner: dead },
    ]);
    const [crashed, queued] = ids as [string, string];
    server = await startServe({ SOURCEBOUND_DATA_DIR: dir });
    expect(jobsIn(dir).get(crashed)).toMatchObject({ state: 'failed', error: `abandoned: process ${dead.pid} on ${dead.host} ended before the job finished` });
    const rerun = await waitFor(
      () => {
        const j = jobsIn(dir).get(queued)!;
        return j.state === 'succeeded' || j.state === 'failed' ? j : null;
      },
      { what: 'the requeued re-index job to finish in the server', timeoutMs: 30_000, intervalMs: 100 },
    );
    expect(rerun).toMatchObject({ state: 'succeeded', attempts: 2 });
  }, 90_000);
});
