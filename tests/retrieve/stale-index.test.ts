import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createHashingEmbedder } from '../../src/embed/hashing.js';
import { createLexicalMemory, createRetriever, type LexicalMemory } from '../../src/retrieve/index.js';
import { createVectorIndexes, openStore, type SqliteStore, type VectorIndexes } from '../../src/store/index.js';

// A full re-index swaps every chunk id of a collection; for a moment the in-memory indexes may still name
// the old ones, which the chunk lookup drops. A result mostly made of gone chunks is asked again of FTS5
// for its lexical leg. Invented fixture: notices of a transit operator.

let dir: string;
let store: SqliteStore;
let indexes: VectorIndexes;
const embedder = createHashingEmbedder({ dimensions: 256 });

beforeAll(async () => {
  dir = mkdtempSync(path.join(tmpdir(), 'sb-stale-'));
  store = openStore(path.join(dir, 'db.sqlite'));
  store.ensureCollection('c');
  store.setCollectionEmbedder('c', embedder.id, embedder.dimensions);
  for (let d = 0; d < 12; d++) {
    const text = `Notice ${d}: night buses leave the harbour depot every ${10 + d} minutes after midnight.`;
    const [vector] = await embedder.embed([text]);
    const chunks = [{ ordinal: 0, text, start: 0, end: text.length, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 14, chunkHash: `n${d}` }];
    store.replaceDocument(
      { id: `d${d}`, collection: 'c', source: `d${d}.txt`, root: null, title: `Notice ${d}`, format: 'text', contentHash: `h${d}`, byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text, settingsKey: 's' },
      chunks,
      new Map([[`n${d}`, vector!]]),
      embedder.id,
    );
  }
  indexes = createVectorIndexes({ repo: store, dir: path.join(dir, 'index'), embedderId: embedder.id, dimensions: embedder.dimensions, params: { m: 16, efConstruction: 200, efSearch: 64 } });
  indexes.sync('c');
});

afterAll(() => {
  indexes.close();
  store.close();
  rmSync(dir, { recursive: true, force: true });
});

const options = { candidates: 50, rrfK: 60, lexicalWeight: 1, denseWeight: 0.5, fieldWeights: { title: 2, heading: 1, body: 1 }, rm3: null, denseFeedback: null, mmr: null, lexicalEngine: 'memory' as const };

describe('a lexical index that names chunks which are gone', () => {
  it('is asked again of FTS5, so the result holds the chunks that exist', async () => {
    const real = createLexicalMemory(store);
    real.syncNow();
    let staleCalls = 0;
    // As the in-memory index is for a moment after a swap: it answers, with ids the database no longer has.
    const stale: LexicalMemory = {
      ...real,
      search: (...args) => {
        staleCalls++;
        return (real.search(...args) ?? []).map((h) => ({ chunkId: h.chunkId + 1_000_000, score: h.score }));
      },
    };
    const fresh = await createRetriever({ repo: store, indexes, embedder, options, lexicalIndex: real }).search({ query: 'night buses harbour depot', collection: 'c', k: 5, mode: 'lexical' });
    const hits = await createRetriever({ repo: store, indexes, embedder, options, lexicalIndex: stale }).search({ query: 'night buses harbour depot', collection: 'c', k: 5, mode: 'lexical' });
    expect(staleCalls).toBeGreaterThan(0);
    expect(hits.length).toBe(5);
    // FTS5 scores as the in-memory index does (tests/store/lexical-statistics.test.ts): the same chunks.
    expect(hits.map((h) => h.chunkId)).toEqual(fresh.map((h) => h.chunkId));
    real.close();
  });
});
