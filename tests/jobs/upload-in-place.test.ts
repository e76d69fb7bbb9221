import { readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { createDocumentApi } from '../../src/runtime.js';
import type { SyncResult } from '../../src/store/hnsw-index.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { withDeadline } from '../fixtures/wait.js';

// An upload job touches its own file only, and the request thread loads the index file the job thread saved
// instead of adding the job's vectors to its own index again. A deletion marks the document's points deleted in
// place. Invented fixture: notices of the transit operator.

const cleanups: (() => void | Promise<void>)[] = [];
const idle = (queue: { idle(): Promise<void> }) => withDeadline(queue.idle(), { what: 'the job queue to finish its jobs', timeoutMs: 20_000 });
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

const NOTICES: [string, string][] = [
  ['tram-wifi.md', '# Wifi\n\nFree wifi is available on every tram in the Brackenfold fleet.'],
  ['night-buses.md', '# Night buses\n\nNight buses leave Marrowgate bus station every 30 minutes after midnight.'],
  ['bikes.md', '# Bikes on board\n\nFolded bicycles ride free on every Quarrel Lane tram outside the morning peak.'],
];

describe('uploads and deletions change the vector index in place', () => {
  it('ingests only the uploaded file, and the request thread loads the saved index rather than re-adding vectors', async () => {
    const { rt, cleanup, dataDir } = await tempRuntime();
    cleanups.push(cleanup);
    const seen: SyncResult[] = [];
    const sync = rt.indexes.sync;
    rt.indexes.sync = (c, opts) => {
      const r = sync(c, opts);
      seen.push(r);
      return r;
    };
    const { queue, documents: docs } = createDocumentApi(rt, 'thread');
    cleanups.push(() => queue.close());
    await docs.upload('c', NOTICES[0]![0], new TextEncoder().encode(NOTICES[0]![1]));
    await idle(queue);
    // A file put in the upload folder by hand is no upload: the next upload's job must not pick it up.
    writeFileSync(path.join(dataDir, 'uploads', 'c', 'stray.md'), '# Stray\n\nA notice nobody uploaded about Harrowgate Sidings.');
    const out = await docs.upload('c', NOTICES[1]![0], new TextEncoder().encode(NOTICES[1]![1]));
    await idle(queue);
    const job = rt.jobs.get(out.status === 'queued' ? out.job.id : '')!;
    expect(job.state).toBe('succeeded');
    expect(job.result).toMatchObject({ documents: { added: 1, updated: 0, unchanged: 0, removed: 0, failed: 0 } });
    expect(rt.repo.listDocuments('c').map((d) => d.source).sort()).toEqual(['night-buses.md', 'tram-wifi.md']);
    // Every sync on this thread after a job loaded a file or found nothing to do: none added a vector.
    expect(seen.length).toBeGreaterThanOrEqual(2);
    for (const r of seen) expect(r).toMatchObject({ added: 0, removed: 0, rebuilt: false });
    expect(seen.some((r) => r.loading)).toBe(true);
    const hits = await rt.retriever.search({ query: 'night buses after midnight', collection: 'c', k: 2, mode: 'dense' });
    expect(hits[0]!.source).toBe('night-buses.md');
    const meta = JSON.parse(readFileSync(path.join(dataDir, 'index', 'c.meta.json'), 'utf8')) as { generation: number };
    expect(meta.generation).toBe(rt.repo.collectionState('c')!.generation);
  });

  it('marks a deleted document\'s points deleted and saves, without rebuilding', async () => {
    const { rt, cleanup, dataDir } = await tempRuntime();
    cleanups.push(cleanup);
    const { queue, documents: docs } = createDocumentApi(rt, 'inline');
    cleanups.push(() => queue.close());
    for (const [name, text] of NOTICES) {
      await docs.upload('c', name, new TextEncoder().encode(text));
      await idle(queue);
    }
    const before = rt.indexes.size('c');
    const doomed = rt.repo.listDocuments('c').find((d) => d.source === 'bikes.md')!;
    const chunks = rt.repo.chunksOfDocuments([doomed.id]).map((r) => r.id);
    expect(chunks.length).toBeGreaterThan(0);
    docs.remove('c', doomed.id);
    expect(rt.indexes.size('c')).toBe(before - chunks.length);
    expect(rt.indexes.deletedCount('c')).toBe(chunks.length); // tombstones: marked, not rebuilt
    const meta = JSON.parse(readFileSync(path.join(dataDir, 'index', 'c.meta.json'), 'utf8')) as { generation: number; deleted: number[] };
    expect(meta.generation).toBe(rt.repo.collectionState('c')!.generation);
    expect(meta.deleted.sort()).toEqual([...chunks].sort());
    const hits = await rt.retriever.search({ query: 'folded bicycles Quarrel Lane tram', collection: 'c', k: 5, mode: 'dense' });
    for (const h of hits) expect(chunks).not.toContain(h.chunkId);
  });
});
