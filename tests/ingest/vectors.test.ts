import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { createHashingEmbedder } from '../../src/embed/hashing.js';
import type { Embedder } from '../../src/embed/types.js';
import { createIngestor } from '../../src/ingest/pipeline.js';
import { embedAndStore, storedVectors } from '../../src/ingest/vectors.js';
import { silentLogger } from '../../src/logger.js';
import { createVectorIndexes, openStore, type SqliteStore, type VectorIndexes } from '../../src/store/index.js';
import type { LoadedDocument } from '../../src/types.js';
import { mulberry32 } from '../fixtures/random.js';

// A document's vectors are made, stored and indexed a batch at a time (src/ingest/vectors.ts), so that the job
// thread's working set does not grow with the document. Batching must change nothing but memory: the same chunks,
// the same stored vectors, the same vector index.

const DIMS = 64;
const params = { m: 16, efConstruction: 200, efSearch: 128 };
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

/** Paragraphs of seeded made-up words, some repeated so that chunk texts repeat too. */
function document(seed: number, paragraphs: number): string[] {
  const rand = mulberry32(seed);
  const words = Array.from({ length: 300 }, (_, i) => `tram${i.toString(36)}`);
  const para = () => Array.from({ length: 60 }, () => words[Math.floor(rand() * words.length)]).join(' ') + '.';
  const made = Array.from({ length: paragraphs }, para);
  // Every seventh paragraph again, word for word: chunks with equal text share one stored vector.
  return [...made, ...made.filter((_, i) => i % 7 === 0)];
}

function setup(vectorBatch: number): { store: SqliteStore; indexes: VectorIndexes; ingest: ReturnType<typeof createIngestor> } {
  const dir = mkdtempSync(path.join(tmpdir(), 'sb-vectors-'));
  dirs.push(dir);
  const store = openStore(path.join(dir, 'db.sqlite'));
  const embedder = createHashingEmbedder({ dimensions: DIMS });
  const indexes = createVectorIndexes({ repo: store, dir: path.join(dir, 'index'), embedderId: embedder.id, dimensions: DIMS, params });
  const ingest = createIngestor({
    repo: store,
    indexes,
    embedder,
    options: { targetTokens: 60, maxTokens: 90, overlapTokens: 10, documentMaxBytes: 10_000_000 },
    logger: silentLogger(),
    batchSize: 5,
    vectorBatch,
  });
  return { store, indexes, ingest };
}

describe('a document embedded and indexed a batch of vectors at a time', () => {
  it('gives the same chunks, stored vectors and vector-index neighbours as the whole document at once', async () => {
    const paragraphs = document(7, 90);
    const loaded: LoadedDocument = { title: 'Long', format: 'text', blocks: paragraphs.map((text) => ({ kind: 'paragraph', text })), pageCount: null, effectiveDate: null, metadata: {} };
    const docs = () => [{ source: 'long.txt', loaded, contentHash: 'h1', byteSize: 1 }];
    const small = setup(3);
    const whole = setup(1_000_000);
    const a = await small.ingest.ingestLoaded('c', docs());
    const b = await whole.ingest.ingestLoaded('c', docs());
    expect(a.failures).toEqual([]);
    expect(a.chunks).toEqual(b.chunks);
    // Enough chunks that a batch of 3 means many batches, and some chunk texts repeat (reused, not embedded twice).
    expect(a.chunks.embedded).toBeGreaterThan(30);
    expect(a.chunks.reused).toBeGreaterThan(0);

    const rowsA = small.store.chunksOfCollection('c');
    const rowsB = whole.store.chunksOfCollection('c');
    expect(rowsA).toEqual(rowsB);
    const ids = rowsA.map((r) => r.id);
    const viewsA = small.store.chunkViews(ids);
    const viewsB = whole.store.chunkViews(ids);
    for (const id of ids) expect(viewsA.get(id)).toEqual(viewsB.get(id));
    const vecA = small.store.chunkVectors('hashing-v1-64', ids);
    const vecB = whole.store.chunkVectors('hashing-v1-64', ids);
    expect(vecA.size).toBe(ids.length);
    for (const id of ids) expect(Buffer.from(vecA.get(id)!.buffer).equals(Buffer.from(vecB.get(id)!.buffer))).toBe(true);

    // Same points added in the same order with hnswlib's fixed seed: the same graph, so the same neighbours.
    expect(small.indexes.size('c')).toBe(ids.length);
    for (const id of ids.filter((_, i) => i % 5 === 0)) {
      const q = vecA.get(id)!;
      expect(small.indexes.search('c', q, 8)).toEqual(whole.indexes.search('c', q, 8));
    }
    small.store.close();
    whole.store.close();
  });

  it('never holds more than one batch of vectors: each store and each index read is one batch, in document order', async () => {
    const calls: number[] = [];
    const embedder: Embedder = {
      id: 'count',
      dimensions: 2,
      semantic: false,
      maxTokens: 512,
      countTokens: (t) => t.length,
      async embed(texts) {
        calls.push(texts.length);
        return texts.map((t) => new Float32Array([t.length, 1]));
      },
    };
    const stores: number[] = [];
    const storedHashes: string[] = [];
    const repo = {
      vectorHashes: (_m: string, hashes: readonly string[]) => new Set(hashes.filter((h) => h === 'h2')),
      putVectors: (_m: string, v: ReadonlyMap<string, Float32Array>) => {
        stores.push(v.size);
        storedHashes.push(...v.keys());
      },
    };
    // 23 chunks, 20 distinct hashes (h0 four times), h2 stored already: 19 to embed.
    const hashes = Array.from({ length: 23 }, (_, i) => (i >= 20 ? 'h0' : `h${i}`));
    const n = await embedAndStore(repo, embedder, hashes, (i) => 'x'.repeat(i + 1), { embedBatch: 3, vectorBatch: 7 });
    expect(n).toBe(19);
    expect(stores).toEqual([7, 7, 5]);
    expect(calls).toEqual([3, 3, 1, 3, 3, 1, 3, 2]);
    expect(storedHashes).toEqual(Array.from({ length: 20 }, (_, i) => `h${i}`).filter((h) => h !== 'h2'));

    const reads: number[][] = [];
    const read = { chunkVectors: (_m: string, ids: readonly number[]) => (reads.push([...ids]), new Map(ids.filter((id) => id !== 4).map((id) => [id, new Float32Array([id, 0])]))) };
    const added = storedVectors(read, 'count', [1, 2, 3, 4, 5], 2);
    expect(added.count).toBe(5);
    expect(reads).toEqual([]); // nothing read before the index asks
    const got = [...added.batches()].map((b) => b.map((p) => p.id));
    expect(got).toEqual([[1, 2], [3], [5]]);
    expect(reads).toEqual([[1, 2], [3, 4], [5]]);
  });
});
