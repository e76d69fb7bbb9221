import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createHashingEmbedder } from '../../src/embed/hashing.js';
import { createLexicalMemory, createRetriever, type LexicalEngine, type Retriever } from '../../src/retrieve/index.js';
import { createVectorIndexes, openStore, type SqliteStore, type VectorIndexes } from '../../src/store/index.js';
import type { DocumentFilter, SearchHit } from '../../src/types.js';

// A filter is resolved through indexed rows (document ids, document_metadata) into one allowed-chunk set that
// both legs search inside. Searching inside the filter must give what the unfiltered search gives once its
// results are filtered afterwards: per leg the same chunks in the same order with the same scores, and in
// hybrid mode the same set. RM3 and dense feedback are off here: both feed on the first lexical hits, which
// a filter rightly changes. Invented fixture: service notices of a transit operator, in four zones.

const ZONES = ['north', 'south', 'east', 'west'];
const SUBJECTS = ['night buses', 'tram platforms', 'lost property', 'bicycle racks', 'ticket machines', 'delay refunds'];

let dir: string;
let store: SqliteStore;
let indexes: VectorIndexes;
const embedder = createHashingEmbedder({ dimensions: 256 });
let total = 0;

beforeAll(async () => {
  dir = mkdtempSync(path.join(tmpdir(), 'sb-filter-'));
  store = openStore(path.join(dir, 'db.sqlite'));
  store.ensureCollection('c');
  store.setCollectionEmbedder('c', embedder.id, embedder.dimensions);
  store.ensureCollection('other');
  for (let d = 0; d < 60; d++) {
    const texts = Array.from({ length: 4 }, (_, i) => `Notice ${d} item ${i}: ${SUBJECTS[(d + i) % SUBJECTS.length]} at the ${ZONES[d % 4]} depot, step ${i} of ${d % 7}.`);
    const vectors = await embedder.embed(texts);
    const chunks = texts.map((text, i) => ({ ordinal: i, text, start: 0, end: text.length, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 12, chunkHash: `d${d}-${i}` }));
    const metadata: Record<string, string> = { zone: ZONES[d % 4]!, issue: String(d % 3) };
    for (const collection of d < 50 ? ['c'] : ['c', 'other']) {
      store.replaceDocument(
        { id: `${collection}-d${d}`, collection, source: `d${d}.txt`, root: null, title: `Notice ${d}`, format: 'text', contentHash: `h${d}`, byteSize: 1, pageCount: null, effectiveDate: null, metadata, text: texts.join('\n'), settingsKey: 's' },
        chunks,
        new Map(chunks.map((c, i) => [c.chunkHash, vectors[i]!])),
        embedder.id,
      );
    }
  }
  total = store.getCollection('c')!.chunks;
  indexes = createVectorIndexes({ repo: store, dir: path.join(dir, 'index'), embedderId: embedder.id, dimensions: embedder.dimensions, params: { m: 16, efConstruction: 200, efSearch: 512 } });
  indexes.sync('c');
});

afterAll(() => {
  indexes.close();
  store.close();
  rmSync(dir, { recursive: true, force: true });
});

const retriever = (engine: LexicalEngine): Retriever => {
  const lexicalIndex = engine === 'memory' ? createLexicalMemory(store) : undefined;
  lexicalIndex?.syncNow();
  return createRetriever({
    repo: store,
    indexes,
    embedder,
    options: { candidates: 1000, rrfK: 60, lexicalWeight: 1, denseWeight: 0.5, fieldWeights: { title: 2, heading: 1, body: 1 }, rm3: null, denseFeedback: null, mmr: null, lexicalEngine: engine },
    ...(lexicalIndex ? { lexicalIndex } : {}),
  });
};

const FILTERS: [string, DocumentFilter][] = [
  ['one metadata value', { metadata: { zone: 'east' } }],
  ['two metadata values', { metadata: { zone: 'north', issue: '2' } }],
  ['document ids', { documentIds: ['c-d3', 'c-d17', 'c-d40', 'other-d55'] }],
  ['ids and metadata', { documentIds: ['c-d1', 'c-d5', 'c-d8', 'c-d9'], metadata: { zone: 'south' } }],
  ['a value no document has', { metadata: { zone: 'harbour' } }],
];

// The same chunks with the same scores, rank by rank, up to float32 rounding: the graph search computes the
// similarity in float32 and the exact scan of a selective filter in float64, so two chunks whose scores differ
// by less than that rounding may trade places, and nothing else may.
const same = (got: SearchHit[], want: SearchHit[], what: string): void => {
  expect(got.length, what).toBe(want.length);
  got.forEach((h, i) => expect(Math.abs(h.score - want[i]!.score), `${what}, rank ${i + 1}`).toBeLessThan(1e-6));
  const score = new Map(want.map((h) => [h.chunkId, h.score]));
  for (const h of got) expect(Math.abs(h.score - (score.get(h.chunkId) ?? Infinity)), `${what}, chunk ${h.chunkId}`).toBeLessThan(1e-6);
};

describe.each(['fts5', 'memory'] as const)('a filter inside both legs (lexical engine %s)', (engine) => {
  it.each(FILTERS)('%s: the same hits as the unfiltered search filtered afterwards', async (_label, filter) => {
    const r = retriever(engine);
    const passes = (h: SearchHit): boolean =>
      (filter.documentIds === undefined || filter.documentIds.includes(h.documentId)) &&
      Object.entries(filter.metadata ?? {}).every(([k, v]) => store.getDocument(h.documentId)!.metadata[k] === v);
    for (const query of ['night buses north depot', 'refunds for delay at the east depot', 'lost property step 3']) {
      for (const mode of ['lexical', 'dense'] as const) {
        const all = await r.search({ query, collection: 'c', k: total, mode });
        const within = await r.search({ query, collection: 'c', k: total, mode, filter });
        same(within, all.filter(passes), `${mode}: ${query}`);
        const top = await r.search({ query, collection: 'c', k: 5, mode, filter });
        same(top, all.filter(passes).slice(0, 5), `${mode} top 5: ${query}`);
      }
      const all = await r.search({ query, collection: 'c', k: total, mode: 'hybrid' });
      const within = await r.search({ query, collection: 'c', k: total, mode: 'hybrid', filter });
      expect(new Set(within.map((h) => h.chunkId))).toEqual(new Set(all.filter(passes).map((h) => h.chunkId)));
    }
  });
});

describe('a filter vector cache bounded below the collection (limits.vectorCacheMb)', () => {
  it('gives the same dense hits as an unbounded one', async () => {
    // Room for 10 of the collection's 240 vectors: every filtered scan reads most of its vectors from the store.
    const small = createVectorIndexes({ repo: store, dir: path.join(dir, 'index'), embedderId: embedder.id, dimensions: embedder.dimensions, params: { m: 16, efConstruction: 200, efSearch: 512 }, cacheBytes: 10 * embedder.dimensions * 4 });
    small.sync('c', { persist: false });
    try {
      for (const [label, filter] of FILTERS) {
        const allowed = store.chunkIdsMatching('c', filter);
        for (const query of ['night buses north depot', 'lost property step 3']) {
          const [v] = await embedder.embed([query]);
          for (let round = 0; round < 2; round++) {
            expect(small.search('c', v!, 5, allowed), `${label}: ${query}, round ${round}`).toEqual(indexes.search('c', v!, 5, allowed));
          }
        }
      }
    } finally {
      small.close();
    }
  });
});

describe('the Rocchio centroid\'s vectors through the vector cache', () => {
  it('gives the same hybrid ranking, to the last bit, as reading them from the store, cold and warm', async () => {
    const withFeedback = (viaCache: boolean): Retriever =>
      createRetriever({
        repo: store,
        indexes: viaCache ? indexes : { ...indexes, vectors: undefined },
        embedder,
        options: { candidates: 100, rrfK: 60, lexicalWeight: 1, denseWeight: 0.5, fieldWeights: { title: 2, heading: 1, body: 1 }, rm3: null, denseFeedback: 1, mmr: null, lexicalEngine: 'fts5' },
      });
    const cached = withFeedback(true);
    const plain = withFeedback(false);
    for (let round = 0; round < 2; round++) {
      for (const query of ['night buses north depot', 'refunds for delay at the east depot', 'ticket machines step 2']) {
        const want = await plain.search({ query, collection: 'c', k: 20, mode: 'hybrid' });
        expect(want.length).toBeGreaterThan(0);
        expect(await cached.search({ query, collection: 'c', k: 20, mode: 'hybrid' }), `${query}, round ${round}`).toEqual(want);
      }
    }
    expect(indexes.cachedVectors('c')).toBeGreaterThan(0);
  });
});

describe('the allowed-chunk set', () => {
  it('holds exactly the chunks of the documents that pass, in this collection only', () => {
    const zoneEast = store.chunkIdsMatching('c', { metadata: { zone: 'east' } });
    const expected = store.chunksOfDocuments(store.listDocuments('c').filter((d) => d.metadata.zone === 'east').map((d) => d.id)).map((r) => r.id);
    expect([...zoneEast].sort((a, b) => a - b)).toEqual(expected);
    expect(store.chunkIdsMatching('c', { documentIds: ['other-d55'] }).size).toBe(0);
    expect(store.chunkIdsMatching('c', { documentIds: [] }).size).toBe(0);
  });

  it('follows a document whose metadata changed', () => {
    const before = store.getDocument('c-d2')!;
    const ids = store.chunksOfDocuments(['c-d2']).map((r) => r.id);
    expect([...store.chunkIdsMatching('c', { metadata: { zone: 'east' } })]).toEqual(expect.arrayContaining(ids));
    store.replaceDocument({ ...before, metadata: { zone: 'harbour' }, text: 'x' }, [], new Map(), embedder.id);
    expect(store.chunkIdsMatching('c', { metadata: { zone: 'east' } }).has(ids[0]!)).toBe(false);
    expect(store.chunkIdsMatching('c', { metadata: { zone: 'harbour' } }).size).toBe(0); // no chunks now
    expect(store.documentKeys('c').some((d) => d.id === 'c-d2')).toBe(true);
  });
});
