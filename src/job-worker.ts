// The job worker thread, started by the job queue (src/jobs/queue.ts, wired in src/runtime.ts): its own store
// connection, embedder and indexes, so ingestion never blocks the event loop that serves queries. The queue
// claims each job and hands it over here, one at a time, so that when this thread dies (out of memory, say)
// the queue knows which job it took down.
import { platform, setPriority } from 'node:os';
import { parentPort, workerData } from 'node:worker_threads';
import type { Config } from './config/index.js';
import { runOne, type FromJobThread, type ToJobThread } from './jobs/index.js';
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
// Without the database's memory map: this thread reads in batches what it has just written, and mapped pages
// would count in the process's resident size (src/store/sqlite/db.ts).
const rt = await createRuntime(config, logger, { processMetrics: false, mapDatabase: false });
const ctx = jobContext(rt);
let running = false;
let stopping = false;

const send = (m: FromJobThread): void => parentPort?.postMessage(m);

function stop(): never {
  rt.close();
  process.exit(0);
}

parentPort?.on('message', (m: ToJobThread) => {
  if ('stop' in m) {
    stopping = true;
    if (!running) stop();
    return;
  }
  running = true;
  // A job's vector graphs are in the files it saved, which the request thread reads; kept here as well, a large
  // collection's graph (hnswlib's native memory, which V8 does not see) would cost twice until the next job. They
  // are freed before the job's end is recorded (a search that follows it at once reads the file), and once more
  // after it, whatever happened in between.
  void runOne(ctx, m.run, logger, () => rt.indexes.close()).finally(() => {
    rt.indexes.close();
    running = false;
    send({ done: m.run.id });
    if (stopping) stop();
  });
});

send({ ready: true });
