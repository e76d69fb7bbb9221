// A job runner that cannot wedge: a job whose thread dies (out of memory, or stopped for running too long) is
// failed with the reason, the thread is replaced and the next job runs; /health says what happened, and answers
// 503 only while the thread keeps dying before it can take any job. Waits are on conditions, with deadlines
// that turn a hang into a message; nothing here measures speed.
import { existsSync } from 'node:fs';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { createJobQueue } from '../../src/jobs/index.js';
import { appDeps, createDocumentApi, jobContext } from '../../src/runtime.js';
import { silentLogger } from '../../src/logger.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { waitFor } from '../fixtures/wait.js';

const cleanups: (() => void | Promise<void>)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

// Stand-in job threads for the two failures the real one cannot be made to show on demand: a job that never
// ends, and a thread that cannot start. Plain scripts, so they need no build step.
const FIXTURES = path.join(import.meta.dirname, 'fixtures');

describe('a job thread that dies', () => {
  it('fails the job it held with the reason, starts a new thread, and the next job runs', async () => {
    // The real job thread (dist/job-worker.js) with a heap far too small for the first upload.
    const { rt, dataDir, cleanup } = await tempRuntime({ limits: { jobThreadMaxHeapMb: 48 } });
    cleanups.push(cleanup);
    const { queue, documents } = createDocumentApi(rt, 'thread');
    cleanups.push(() => queue.close());
    const app = buildApp(rt.config, appDeps(rt, () => true, documents, queue));
    cleanups.push(() => app.close());

    // A million and a half one-character paragraphs: every line and block is an object on the thread's heap.
    const hog = await documents.upload('c', 'many-paragraphs.txt', new TextEncoder().encode('x\n\n'.repeat(1_500_000)));
    const small = await documents.upload('c', 'tram-wifi.md', new TextEncoder().encode('# Wifi\n\nFree wifi is available on every tram in the Brackenfold fleet.'));
    if (hog.status !== 'queued' || small.status !== 'queued') throw new Error('both uploads should be queued');

    const failed = await waitFor(() => (rt.jobs.get(hog.job.id)?.state === 'failed' ? rt.jobs.get(hog.job.id) : null), {
      what: 'the job whose thread ran out of memory to be failed',
      detail: () => JSON.stringify({ job: rt.jobs.get(hog.job.id), queue: queue.health() }),
    });
    expect(failed.error).toBe('the job thread ran out of memory: it needed more than its heap of 48 MiB (limits.jobThreadMaxHeapMb)');
    expect(failed.finishedAt).not.toBeNull();
    // Its file left the upload folder, so no later walk of that folder (a re-index) meets it again.
    expect(existsSync(path.join(dataDir, 'uploads', 'c', 'many-paragraphs.txt'))).toBe(false);
    expect(existsSync(path.join(dataDir, 'uploads-failed', 'c', `${hog.job.id}-many-paragraphs.txt`))).toBe(true);

    const done = await waitFor(() => (['succeeded', 'failed'].includes(rt.jobs.get(small.job.id)!.state) ? rt.jobs.get(small.job.id) : null), {
      what: 'the next job to run on the new thread',
      detail: () => JSON.stringify({ job: rt.jobs.get(small.job.id), queue: queue.health() }),
    });
    expect(done.state).toBe('succeeded');
    // Searchable once the request thread has applied the job's changes (the lexical change thread and the
    // vector index's read of the saved file both run after the job's end): wait for it, with a deadline.
    const hits = await waitFor(
      async () => {
        const h = await rt.retriever.search({ query: 'wifi Brackenfold', collection: 'c', k: 3, mode: 'hybrid' });
        return h[0]?.source === 'tram-wifi.md' ? h : null;
      },
      { what: 'the next job\'s document to be searchable', detail: () => JSON.stringify(queue.health()) },
    );
    expect(hits[0]!.source).toBe('tram-wifi.md');

    // The thread records the job's end in the database before its message reaches the queue: wait for the
    // queue to have heard it too.
    const res = await waitFor(
      async () => {
        const r = await app.inject({ method: 'GET', url: '/health' });
        return (r.json() as { queue?: { state?: string } }).queue?.state === 'idle' ? r : null;
      },
      { what: 'the queue to report idle after the last job', detail: () => JSON.stringify(queue.health()) },
    );
    expect(res.statusCode).toBe(200);
    expect(res.json()).toMatchObject({
      status: 'ok',
      queue: {
        state: 'idle',
        pending: 0,
        running: null,
        threadDeaths: 1,
        lastThreadDeath: { jobId: hog.job.id, reason: failed.error },
      },
    });
  });

  it('stops a job that runs past limits.jobMaxSeconds, fails it and hands the next job to a new thread', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const ctx = jobContext(rt);
    // A thread that takes jobs and never finishes them: the queue must not wait for it for ever.
    const queue = createJobQueue({
      ctx,
      logger: silentLogger(),
      mode: { thread: { script: path.join(FIXTURES, 'never-finishes.mjs'), workerData: null, jobMaxSeconds: 0.2 } },
    });
    cleanups.push(() => queue.close());
    const first = queue.enqueue({ kind: 'reindex', via: 'api' });
    const second = queue.enqueue({ kind: 'reindex', via: 'api' });
    const failed = await waitFor(() => (rt.jobs.get(first.id)?.state === 'failed' ? rt.jobs.get(first.id) : null), {
      what: 'the job that never finished to be failed',
      detail: () => JSON.stringify(queue.health()),
    });
    expect(failed.error).toBe('the job ran longer than 0.2 s (limits.jobMaxSeconds); its thread was stopped');
    // The second job went to a new thread, which never finishes it either: it is stopped the same way.
    const next = await waitFor(() => (rt.jobs.get(second.id)?.state === 'failed' ? rt.jobs.get(second.id) : null), {
      what: 'the next job to be handed to a new thread, and stopped in turn',
      detail: () => JSON.stringify(queue.health()),
    });
    expect(next.error).toBe(failed.error);
    await waitFor(() => queue.health().threadDeaths === 2, { what: 'the queue to count the second stopped thread', detail: () => JSON.stringify(queue.health()) });
    expect(queue.health()).toMatchObject({ pending: 0, threadDeaths: 2, lastThreadDeath: { jobId: second.id, reason: failed.error } });
  });

  it('reports the queue as down (503 on /health) while its thread dies before it can take a job', async () => {
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const queue = createJobQueue({
      ctx: jobContext(rt),
      logger: silentLogger(),
      mode: { thread: { script: path.join(FIXTURES, 'dies-on-start.mjs'), workerData: null } },
    });
    cleanups.push(() => queue.close());
    const job = queue.enqueue({ kind: 'reindex', via: 'api' });
    const app = buildApp(rt.config, { ...appDeps(rt, () => true), queueHealth: () => queue.health() });
    cleanups.push(() => app.close());
    await waitFor(() => queue.health().state === 'down', { what: 'the queue to count as down', detail: () => JSON.stringify(queue.health()) });
    const res = await app.inject({ method: 'GET', url: '/health' });
    expect(res.statusCode).toBe(503);
    const body = res.json();
    expect(body).toMatchObject({ status: 'failing', queue: { state: 'down', pending: 1, running: null, lastThreadDeath: { jobId: null } } });
    expect(body.queue.threadDeaths).toBeGreaterThanOrEqual(3);
    expect(body.queue.lastThreadDeath.reason).toBe('the job thread died: the job thread cannot open its store');
    // Nothing was taken from the queue: the job waits for a thread that can run it.
    expect(rt.jobs.get(job.id)!.state).toBe('queued');
  });
});
