import { Worker } from 'node:worker_threads';
import type { Logger } from '../logger.js';
import type { JobRecord } from '../store/index.js';
import type { JobContext } from './context.js';
import { executeJob, type JobPayload } from './execute.js';
import { ownerGone } from './owner.js';

export interface JobQueue {
  /** Persists a queued job and wakes the runner. */
  enqueue(payload: JobPayload): JobRecord;
  /** Resolves when no job is queued or running (tests, shutdown). */
  idle(): Promise<void>;
  close(): Promise<void>;
}

/** How many times a queued job is tried before it is given up. */
const MAX_ATTEMPTS = 3;

/** Queue jobs left `running` by a process that is gone go back to the queue (up to 3 attempts). */
export function requeueAbandoned(ctx: Pick<JobContext, 'store'>): number {
  return ctx.store.jobs.requeueAbandoned(ownerGone, MAX_ATTEMPTS);
}

/** Claims the oldest queued job for this process atomically, so two runners never take the same one. */
export function claimNext(ctx: Pick<JobContext, 'store' | 'owner'>): JobRecord | null {
  return ctx.store.jobs.claimNext(ctx.owner);
}

export async function runOne(ctx: JobContext, job: JobRecord, log: Logger): Promise<void> {
  const jlog = log.child({ jobId: job.id, kind: job.kind });
  try {
    const summary = await executeJob(ctx, job);
    ctx.store.jobs.succeed(job.id, summary);
    jlog.info({ documents: summary.documents, failures: summary.failures.length }, 'job succeeded');
  } catch (err) {
    ctx.store.jobs.fail(job.id, (err as Error).message);
    jlog.warn({ err: (err as Error).message }, 'job failed');
  }
}

/** The worker thread that runs jobs: its script (src/job-worker.ts compiled) and the data it starts with. */
export interface JobThread {
  script: string | URL;
  workerData: unknown;
}

/**
 * Runs queued jobs off the request thread: in a worker thread with its own store connection and embedder
 * (`thread`), or on the main thread (`inline`, for tests and tiny deployments).
 */
export function createJobQueue(deps: {
  ctx: JobContext;
  logger: Logger;
  mode: { thread: JobThread } | 'inline';
  onJobDone?: (job: JobRecord) => void;
}): JobQueue {
  const { ctx, logger, mode } = deps;
  const log = logger.child({ stage: 'jobs' });
  let idleWaiters: (() => void)[] = [];
  const pending = (): number => ctx.store.jobs.pendingQueued();
  const notifyIdle = (): void => {
    if (pending() > 0) return;
    const w = idleWaiters;
    idleWaiters = [];
    for (const f of w) f();
  };
  const finished = (id: string): void => {
    const job = ctx.store.jobs.get(id);
    // The worker saved the index file; this thread only brings its memory up to date.
    if (job?.collection) ctx.indexes.sync(job.collection, { persist: false });
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
      for (let job = claimNext(ctx); job && !closed; job = claimNext(ctx)) {
        await runOne(ctx, job, log);
        finished(job.id);
      }
    } finally {
      draining = false;
      notifyIdle();
    }
  };

  if (mode !== 'inline') {
    worker = new Worker(mode.thread.script, { workerData: mode.thread.workerData });
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
      const job = ctx.store.jobs.create(payload.kind, collection, payload);
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
