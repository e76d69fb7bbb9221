import { mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { emptySummary } from '../../src/ingest/index.js';
import { runOne, type JobContext } from '../../src/jobs/index.js';
import { silentLogger } from '../../src/logger.js';
import type { JobRecord } from '../../src/store/index.js';

// The job thread frees the vector graphs a job loaded before the job's end is recorded: a client that sees the
// end may search the collection at once, and the request thread then reads the saved graph; held by both threads
// meanwhile, a large collection's graph would count twice in the process's memory.

const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

function context(events: string[], outcome: 'added' | 'failed'): JobContext {
  const dataDir = mkdtempSync(path.join(os.tmpdir(), 'sb-run-one-'));
  dirs.push(dataDir);
  return {
    dataDir,
    ingestor: {
      async ingestPath() {
        events.push('ingested');
        const summary = emptySummary();
        if (outcome === 'failed') summary.failures.push({ source: 'a.txt', reason: 'not a readable document' });
        else summary.documents.added = 1;
        return summary;
      },
    },
    store: {
      jobs: {
        succeed: () => void events.push('succeeded'),
        fail: () => void events.push('failed'),
      },
    },
  } as unknown as JobContext;
}

const job = { id: 'j1', kind: 'upload', payload: { kind: 'upload', via: 'api', collection: 'c', root: '/nowhere', source: 'a.txt' } } as unknown as JobRecord;

describe('runOne', () => {
  it('runs the release step after the work and before the job is recorded as succeeded', async () => {
    const events: string[] = [];
    await runOne(context(events, 'added'), job, silentLogger(), () => events.push('released'));
    expect(events).toEqual(['ingested', 'released', 'succeeded']);
  });

  it('runs it before a failure is recorded too', async () => {
    const events: string[] = [];
    await runOne(context(events, 'failed'), job, silentLogger(), () => events.push('released'));
    expect(events[0]).toBe('ingested');
    expect(events.indexOf('released')).toBeGreaterThan(0);
    expect(events.indexOf('released')).toBeLessThan(events.indexOf('failed'));
  });
});
