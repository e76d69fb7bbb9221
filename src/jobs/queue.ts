import { Worker } from 'node:worker_threads';
import type { Logger } from '../logger.js';
import type { JobRecord } from '../store/index.js';
import type { JobContext } from './context.js';
import { executeJob, JobFailed, type JobPayload } from './execute.js';
import { ownerGone } from './owner.js';
import { setAsideUpload } from './set-aside.js';

/** What `/health` says about the queue (docs/api.md). */
export interface QueueHealth {
  /**
   * `idle`: nothing to do; `working`: a job is running; `restarting`: the job thread died and a new one is
   * starting; `down`: the job thread keeps dying before it can take a job, so queued jobs wait (503).
   */
  state: 'idle' | 'working' | 'restarting' | 'down';
  /** Queue jobs waiting or running. */
  pending: number;
  /** The job running now and for how long. */
  running: { id: string; kind: string; seconds: number } | null;
  /** Job threads that died since the server started (each one replaced). */
  threadDeaths: number;
  /** The last job thread death: when, why, and the job it took down (failed with that reason). */
  lastThreadDeath: { at: string; reason: string; jobId: string | null } | null;
}

export interface JobQueue {
  /** Persists a queued job and wakes the runner. */
  enqueue(payload: JobPayload): JobRecord;
  /** Resolves when no job is queued or running (tests, shutdown). */
  idle(): Promise<void>;
  /** The runner's state, for `/health`. */
  health(): QueueHealth;
  close(): Promise<void>;
}

/** How many times a queued job is tried before it is given up. */
const MAX_ATTEMPTS = 3;
/** Thread deaths in a row before it could take a job, after which the queue counts as down. */
const DOWN_AFTER = 3;
/** Longest wait before another try at starting a thread that keeps dying on start. */
const MAX_RESTART_DELAY_MS = 30_000;
/** How often the runner looks for jobs other processes queued. */
const POLL_MS = 5_000;

/** Queue jobs left `running` by a process that is gone go back to the queue (up to 3 attempts). */
export function requeueAbandoned(ctx: Pick<JobContext, 'store'>): number {
  return ctx.store.jobs.requeueAbandoned(ownerGone, MAX_ATTEMPTS);
}

/** Claims the oldest queued job for this process atomically, so two runners never take the same one. */
export function claimNext(ctx: Pick<JobContext, 'store' | 'owner' | 'leaseMs'>): JobRecord | null {
  return ctx.store.jobs.claimNext(ctx.owner, ctx.leaseMs);
}

/** How often a holder renews its leases: three times a lease, so one late beat does not lose it. */
export function heartbeatMs(leaseMs: number): number {
  return Math.max(1000, Math.floor(leaseMs / 3));
}

/**
 * Runs one job and records how it ended. `release` (the job thread's: it frees the vector graphs the job loaded)
 * runs before the end is recorded: a client that sees the job end may search the collection at once, and the
 * request thread then reads the saved graph, which must not be held twice meanwhile.
 */
export async function runOne(ctx: JobContext, job: JobRecord, log: Logger, release: () => void = () => undefined): Promise<void> {
  const jlog = log.child({ jobId: job.id, kind: job.kind });
  try {
    const summary = await executeJob(ctx, job);
    release();
    ctx.store.jobs.succeed(job.id, summary);
    jlog.info({ documents: summary.documents, failures: summary.failures.length }, 'job succeeded');
  } catch (err) {
    release();
    // A job that ran to the end but failed at what it was for keeps its summary beside the reason.
    ctx.store.jobs.fail(job.id, (err as Error).message, err instanceof JobFailed ? err.summary : undefined);
    jlog.warn({ err: (err as Error).message, setAside: setAside(ctx, job, jlog) }, 'job failed');
  }
}

/** Moves a failed upload's file aside (src/jobs/set-aside.ts); a failure to do so is logged, never thrown. */
function setAside(ctx: JobContext, job: JobRecord, log: Logger): string | null {
  try {
    return setAsideUpload(ctx, job);
  } catch (err) {
    log.error({ err }, 'could not move the failed upload out of its folder');
    return null;
  }
}

/** The worker thread that runs jobs: its script (src/job-worker.ts compiled) and the data it starts with. */
export interface JobThread {
  script: string | URL;
  workerData: unknown;
  /** Heap of the thread in MiB (`limits.jobThreadMaxHeapMb`). */
  maxHeapMb?: number;
  /** Longest one job may run before its thread is stopped (`limits.jobMaxSeconds`). */
  jobMaxSeconds?: number;
}

/** Messages between the queue and its thread (src/job-worker.ts). */
export type ToJobThread = { run: JobRecord } | { stop: true };
export type FromJobThread = { ready: true } | { done: string };

/**
 * Runs queued jobs off the request thread: in a worker thread with its own store connection and embedder
 * (`thread`), or on the main thread (`inline`, for tests and tiny deployments).
 *
 * In thread mode this thread claims each job and hands it to the worker, so it always knows which job the
 * worker holds. When the worker dies (out of memory, a crash, or stopped for running past
 * `limits.jobMaxSeconds`) that job fails with the reason, a new worker starts, and the queue moves on.
 */
export function createJobQueue(deps: {
  ctx: JobContext;
  logger: Logger;
  mode: { thread: JobThread } | 'inline';
  onJobDone?: (job: JobRecord) => void;
  /** Milliseconds since the epoch (tests pass their own). */
  now?: () => number;
}): JobQueue {
  const { ctx, logger, mode } = deps;
  const now = deps.now ?? Date.now;
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
    // The worker saved the index file; this thread reads it off the thread and answers from the index it has
    // until then. The queue counts as idle once the read is done, so that waiting for idle means searchable.
    if (job?.collection) ctx.indexes.sync(job.collection, { persist: false });
    if (job) deps.onJobDone?.(job);
    if (job?.collection) void ctx.indexes.settled(job.collection).then(notifyIdle);
    else notifyIdle();
  };

  const idle = (): Promise<void> => {
    if (pending() === 0) return ctx.indexes.settled();
    return new Promise<void>((resolve) => idleWaiters.push(resolve));
  };

  let closed = false;
  let threadDeaths = 0;
  let lastThreadDeath: QueueHealth['lastThreadDeath'] = null;
  let current: { job: JobRecord; since: number } | null = null;
  // Thread mode only: whether the worker has said it is ready, and its deaths in a row before it could be.
  let ready = false;
  let deathsBeforeReady = 0;

  const health = (): QueueHealth => {
    const p = pending();
    const running = current ? { id: current.job.id, kind: current.job.kind, seconds: Math.round((now() - current.since) / 1000) } : null;
    let state: QueueHealth['state'] = running || p > 0 ? 'working' : 'idle';
    if (mode !== 'inline' && !ready) {
      if (deathsBeforeReady >= DOWN_AFTER) state = 'down';
      else if (threadDeaths > 0) state = 'restarting';
    }
    return { state, pending: p, running, threadDeaths, lastThreadDeath };
  };

  // The heartbeat: this process renews the leases of the jobs it holds, then puts back in the queue the jobs
  // of holders that stopped renewing theirs (a server on another host that died, say). Renewing first means a
  // beat that comes late (a busy event loop) never takes this process's own jobs for abandoned ones.
  const beat = (): void => {
    if (closed) return;
    try {
      ctx.store.jobs.renewLeases(ctx.owner.holder, ctx.leaseMs);
      const requeued = requeueAbandoned(ctx);
      if (requeued > 0) log.warn({ jobs: requeued }, 'jobs whose holder stopped renewing their lease went back to the queue');
    } catch (err) {
      log.error({ err }, 'could not renew job leases');
    }
  };
  const heartbeat = setInterval(beat, heartbeatMs(ctx.leaseMs));
  heartbeat.unref();

  if (mode === 'inline') {
    let draining = false;
    const drainInline = async (): Promise<void> => {
      if (draining) return;
      draining = true;
      try {
        for (let job = claimNext(ctx); job && !closed; job = claimNext(ctx)) {
          current = { job, since: now() };
          await runOne(ctx, job, log);
          current = null;
          finished(job.id);
        }
      } finally {
        draining = false;
        notifyIdle();
      }
    };
    return {
      enqueue(payload) {
        const job = createJob(ctx, payload);
        void drainInline();
        return job;
      },
      idle,
      health,
      async close() {
        closed = true;
        clearInterval(heartbeat);
      },
    };
  }

  const thread = mode.thread;
  let worker: Worker | null = null;
  // Set from the worker's 'exit', listened for from its creation: close() must not wait for an exit that
  // already happened, since 'exit' is emitted only once.
  let workerExited = true;
  let lastError: Error | null = null;
  let stopReason: string | null = null;
  let watchdog: NodeJS.Timeout | null = null;
  let restartTimer: NodeJS.Timeout | null = null;

  const dispatch = (): void => {
    if (closed || !worker || !ready || current) return;
    const job = claimNext(ctx);
    if (!job) return;
    current = { job, since: now() };
    const w = worker;
    if (thread.jobMaxSeconds !== undefined) {
      watchdog = setTimeout(() => {
        stopReason = `the job ran longer than ${thread.jobMaxSeconds} s (limits.jobMaxSeconds); its thread was stopped`;
        log.warn({ jobId: job.id }, stopReason);
        void w.terminate();
      }, thread.jobMaxSeconds * 1000);
      watchdog.unref();
    }
    w.postMessage({ run: job } satisfies ToJobThread);
  };

  const start = (): void => {
    restartTimer = null;
    if (closed) return;
    ready = false;
    lastError = null;
    stopReason = null;
    workerExited = false;
    const w = new Worker(thread.script, {
      workerData: thread.workerData,
      ...(thread.maxHeapMb !== undefined ? { resourceLimits: { maxOldGenerationSizeMb: thread.maxHeapMb } } : {}),
    });
    worker = w;
    w.on('message', (m: FromJobThread) => {
      if ('ready' in m) {
        ready = true;
        deathsBeforeReady = 0;
        dispatch();
      } else if ('done' in m) {
        if (watchdog) clearTimeout(watchdog);
        watchdog = null;
        current = null;
        finished(m.done);
        dispatch();
      }
    });
    w.on('error', (err) => {
      lastError = err;
      log.error({ err }, 'job thread died');
    });
    w.once('exit', (code) => {
      workerExited = true;
      worker = null;
      if (watchdog) clearTimeout(watchdog);
      watchdog = null;
      if (closed) return;
      const reason = threadDeathReason(stopReason, lastError, code, thread.maxHeapMb);
      threadDeaths++;
      const lost = current?.job ?? null;
      current = null;
      lastThreadDeath = { at: new Date(now()).toISOString(), reason, jobId: lost?.id ?? null };
      if (lost) {
        ctx.store.jobs.fail(lost.id, reason);
        log.warn({ jobId: lost.id, reason, setAside: setAside(ctx, lost, log) }, 'job failed: its thread died');
        finished(lost.id);
      }
      if (!ready) deathsBeforeReady++;
      ready = false;
      // A thread that dies while running a job is replaced at once: the job took the blame. One that dies
      // before it could take any job waits longer each time, so a broken start-up does not spin.
      const delay = deathsBeforeReady === 0 ? 0 : Math.min(MAX_RESTART_DELAY_MS, 250 * 2 ** (deathsBeforeReady - 1));
      log.warn({ reason, restartInMs: delay }, 'starting a new job thread');
      restartTimer = setTimeout(start, delay);
      restartTimer.unref();
    });
    w.unref();
  };
  start();
  // Jobs queued by other processes (or requeued after a crash) are looked for now and then.
  const poll = setInterval(dispatch, POLL_MS);
  poll.unref();

  return {
    enqueue(payload) {
      const job = createJob(ctx, payload);
      dispatch();
      return job;
    },
    idle,
    health,
    async close() {
      closed = true;
      clearInterval(poll);
      clearInterval(heartbeat);
      if (restartTimer) clearTimeout(restartTimer);
      if (watchdog) clearTimeout(watchdog);
      const w = worker;
      if (w && !workerExited) {
        w.postMessage({ stop: true } satisfies ToJobThread);
        await new Promise<void>((resolve) => {
          const t = setTimeout(() => void w.terminate().then(() => resolve()), 30_000);
          w.once('exit', () => {
            clearTimeout(t);
            resolve();
          });
        });
      }
    },
  };
}

function createJob(ctx: JobContext, payload: JobPayload): JobRecord {
  const collection = payload.kind === 'upload' ? payload.collection : (payload.collection ?? null);
  return ctx.store.jobs.create(payload.kind, collection, payload);
}

/** Why a job thread ended, in words for the job's error and `/health`. */
function threadDeathReason(stopReason: string | null, err: Error | null, code: number, maxHeapMb: number | undefined): string {
  if (stopReason) return stopReason;
  if (err && (err as NodeJS.ErrnoException).code === 'ERR_WORKER_OUT_OF_MEMORY') {
    const limit = maxHeapMb !== undefined ? ` of ${maxHeapMb} MiB (limits.jobThreadMaxHeapMb)` : '';
    return `the job thread ran out of memory: it needed more than its heap${limit}`;
  }
  if (err) return `the job thread died: ${err.message}`;
  return `the job thread exited unexpectedly (code ${code})`;
}
