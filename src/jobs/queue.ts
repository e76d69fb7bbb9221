import { existsSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { Config } from '../config/index.js';
import { PACKAGE_ROOT } from '../config/index.js';
import type { Logger } from '../logger.js';
import type { Runtime } from '../runtime.js';
import type { JobRecord } from '../store/index.js';
import { executeJob, type JobPayload } from './execute.js';

export interface JobQueue {
  /** Persists a queued job and wakes the runner. */
  enqueue(payload: JobPayload): JobRecord;
  /** Resolves when no job is queued or running (tests, shutdown). */
  idle(): Promise<void>;
  close(): Promise<void>;
}

/** Jobs that were `running` when the process that ran them died go back to the queue (up to 3 attempts). */
export function requeueAbandoned(rt: Runtime): number {
  const db = rt.db;
  db.prepare(
    "UPDATE jobs SET state = 'failed', error = 'gave up after 3 attempts', finished_at = ? WHERE state = 'running' AND json_extract(payload, '$.via') = 'api' AND attempts >= 3",
  ).run(new Date().toISOString());
  return db
    .prepare("UPDATE jobs SET state = 'queued' WHERE state = 'running' AND json_extract(payload, '$.via') = 'api'")
    .run().changes;
}

/** Claims the oldest queued job atomically, so two runners never take the same one. */
export function claimNext(rt: Runtime): JobRecord | null {
  const row = rt.db
    .prepare(
      `UPDATE jobs SET state = 'running', attempts = attempts + 1, started_at = ?
       WHERE id = (SELECT id FROM jobs WHERE state = 'queued' ORDER BY created_at, rowid LIMIT 1) RETURNING id`,
    )
    .get(new Date().toISOString()) as { id: string } | undefined;
  return row ? rt.jobs.get(row.id) : null;
}

export async function runOne(rt: Runtime, job: JobRecord, log: Logger): Promise<void> {
  const jlog = log.child({ jobId: job.id, kind: job.kind });
  try {
    const summary = await executeJob(rt, job);
    rt.jobs.succeed(job.id, summary);
    jlog.info({ documents: summary.documents, failures: summary.failures.length }, 'job succeeded');
  } catch (err) {
    rt.jobs.fail(job.id, (err as Error).message);
    jlog.warn({ err: (err as Error).message }, 'job failed');
  }
}

/**
 * Runs queued jobs off the request thread: in a worker thread with its own database connection and
 * embedder (`thread`), or on the main thread (`inline`, for tests and tiny deployments).
 */
export function createJobQueue(deps: {
  rt: Runtime;
  config: Readonly<Config>;
  logger: Logger;
  mode: 'thread' | 'inline';
  onJobDone?: (job: JobRecord) => void;
}): JobQueue {
  const { rt, logger, mode } = deps;
  const log = logger.child({ stage: 'jobs' });
  let idleWaiters: (() => void)[] = [];
  const pending = (): number =>
    (rt.db.prepare("SELECT count(*) AS n FROM jobs WHERE state IN ('queued', 'running') AND json_extract(payload, '$.via') = 'api'").get() as { n: number }).n;
  const notifyIdle = (): void => {
    if (pending() > 0) return;
    const w = idleWaiters;
    idleWaiters = [];
    for (const f of w) f();
  };
  const finished = (id: string): void => {
    const job = rt.jobs.get(id);
    // The worker saved the index file; this thread only brings its memory up to date.
    if (job?.collection) rt.indexes.sync(job.collection, { persist: false });
    if (job) deps.onJobDone?.(job);
    notifyIdle();
  };

  let worker: Worker | null = null;
  // Set from the worker's 'exit', listened for from its creation: close() must not wait for an exit that
  // already happened (a crashed worker), since 'exit' is emitted only once.
  let workerExited = false;
  let draining = false;
  let closed = false;

  const drainInline = async (): Promise<void> => {
    if (draining) return;
    draining = true;
    try {
      for (let job = claimNext(rt); job && !closed; job = claimNext(rt)) {
        await runOne(rt, job, log);
        finished(job.id);
      }
    } finally {
      draining = false;
      notifyIdle();
    }
  };

  if (mode === 'thread') {
    worker = new Worker(workerScript(), { workerData: { config: JSON.parse(JSON.stringify(deps.config)) } });
    worker.on('message', (m: { done?: string }) => {
      if (m.done) finished(m.done);
    });
    worker.on('error', (err) => log.error({ err }, 'job worker crashed'));
    worker.once('exit', () => (workerExited = true));
    worker.unref();
  }

  return {
    enqueue(payload) {
      const collection = payload.kind === 'upload' ? payload.collection : (payload.collection ?? null);
      const job = rt.jobs.create(payload.kind, collection, payload);
      if (worker) worker.postMessage({ wake: true });
      else void drainInline();
      return job;
    },
    idle() {
      if (pending() === 0) return Promise.resolve();
      return new Promise<void>((resolve) => idleWaiters.push(resolve));
    },
    async close() {
      closed = true;
      if (worker && !workerExited) {
        worker.postMessage({ stop: true });
        await new Promise<void>((resolve) => {
          const t = setTimeout(() => void worker!.terminate().then(() => resolve()), 30_000);
          worker!.once('exit', () => {
            clearTimeout(t);
            resolve();
          });
        });
      }
    },
  };
}

/** dist/jobs/worker.js next to this file when compiled; from src/ (tests) use the compiled copy. */
function workerScript(): string {
  const here = path.dirname(fileURLToPath(import.meta.url));
  const beside = path.join(here, 'worker.js');
  return existsSync(beside) ? beside : path.join(PACKAGE_ROOT, 'dist', 'jobs', 'worker.js');
}
