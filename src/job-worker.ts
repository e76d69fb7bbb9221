// The job worker thread, started by the job queue (src/jobs/queue.ts, wired in src/runtime.ts): its own store
// connection, embedder and indexes, so ingestion never blocks the event loop that serves queries. It claims
// queued jobs one at a time until told to stop.
import { platform, setPriority } from 'node:os';
import { parentPort, workerData } from 'node:worker_threads';
import type { Config } from './config/index.js';
import { claimNext, runOne } from './jobs/index.js';
import { configuredLogger } from './logger.js';
import { createRuntime, jobContext } from './runtime.js';

const config = (workerData as { config: Config }).config;
// On Linux a nice value belongs to one thread, so this lowers only the job thread: when ingest and queries
// want the same core, queries go first (docs/benchmarks.md, "Re-index"). Elsewhere it would lower the whole
// process, queries included, so it is left alone.
if (platform() === 'linux') {
  try {
    setPriority(0, 10);
  } catch {
    /* not permitted: jobs run at normal priority */
  }
}
const logger = configuredLogger(config).child({ thread: 'jobs' });
const rt = await createRuntime(config, logger, { processMetrics: false });
const ctx = jobContext(rt);
let stopping = false;
let running = false;
let wakeAgain = false;

async function drain(): Promise<void> {
  if (running) {
    wakeAgain = true;
    return;
  }
  running = true;
  try {
    do {
      wakeAgain = false;
      for (let job = claimNext(ctx); job && !stopping; job = claimNext(ctx)) {
        await runOne(ctx, job, logger);
        parentPort?.postMessage({ done: job.id });
      }
    } while (wakeAgain && !stopping);
  } finally {
    running = false;
    if (stopping) {
      rt.close();
      process.exit(0);
    }
  }
}

parentPort?.on('message', (m: { wake?: boolean; stop?: boolean }) => {
  if (m.stop) {
    stopping = true;
    if (!running) {
      rt.close();
      process.exit(0);
    }
    return;
  }
  if (m.wake) void drain();
});

// Jobs queued while no server ran (or requeued after a crash) start straight away; a slow poll picks up
// jobs that other processes queue.
void drain();
setInterval(() => void drain(), 5_000).unref();
