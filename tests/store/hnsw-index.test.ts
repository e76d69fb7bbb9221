import { existsSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { createVectorIndexes, openDatabase, SqliteStore, type Db, type Repository } from '../../src/store/index.js';

const DIMS = 8;
const params = { m: 8, efConstruction: 64, efSearch: 64 };

function unit(seed: number): Float32Array {
  // Deterministic pseudo-random unit vectors (a small LCG; any fixed sequence will do).
  const v = new Float32Array(DIMS);
  let x = seed * 7919 + 17;
  for (let i = 0; i < DIMS; i++) {
    x = (x * 1103515245 + 12345) % 2147483648;
    v[i] = x / 2147483648 - 0.5;
  }
  const n = Math.hypot(...v);
  return v.map((a) => a / n);
}

function addDoc(repo: Repository, id: string, n: number, seed: number): void {
  const chunks = Array.from({ length: n }, (_, i) => ({
    ordinal: i, text: `t${seed}-${i}`, start: 0, end: 1, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: `h${seed}-${i}`,
  }));
  const vectors = new Map(chunks.map((c, i) => [c.chunkHash, unit(seed * 100 + i)]));
  repo.replaceDocument(
    { id, collection: 'c', source: `${id}.txt`, root: null, title: id, format: 'text', contentHash: id, byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text: 'x', settingsKey: 's' },
    chunks,
    vectors,
    'emb',
  );
}

describe('vector index files', () => {
  let dir: string;
  let db: Db;
  let repo: Repository;
  beforeEach(() => {
    dir = mkdtempSync(path.join(tmpdir(), 'sb-hnsw-'));
    db = openDatabase(path.join(dir, 'db.sqlite'));
    repo = new SqliteStore(db);
    repo.ensureCollection('c');
  });
  afterEach(() => {
    db.close();
    rmSync(dir, { recursive: true, force: true });
  });

  const make = (embedderId = 'emb') => createVectorIndexes({ repo, dir: path.join(dir, 'index'), embedderId, dimensions: DIMS, params });

  it('finds the exact vector first and returns cosine similarity', () => {
    addDoc(repo, 'a', 20, 1);
    const idx = make();
    expect(idx.sync('c').size).toBe(20);
    const hits = idx.search('c', unit(105), 3);
    const view = repo.chunkViews([hits[0]!.chunkId]).get(hits[0]!.chunkId)!;
    expect(view.chunkHash).toBe('h1-5');
    expect(hits[0]!.score).toBeCloseTo(1, 5);
  });

  // Reference: exact nearest neighbours by brute-force inner product over the stored vectors.
  const exactTop = (q: Float32Array, ids: readonly number[], k: number): number[] => {
    const views = repo.chunkViews(ids);
    const vecs = repo.getVectors('emb', [...views.values()].map((v) => v.chunkHash));
    return ids
      .map((id) => ({ id, s: [...vecs.get(views.get(id)!.chunkHash)!].reduce((a, x, i) => a + x * q[i]!, 0) }))
      .sort((a, b) => b.s - a.s || a.id - b.id)
      .slice(0, k)
      .map((x) => x.id);
  };

  it('returns k hits from inside a selective filter, the same as an exact scan of the allowed chunks', () => {
    addDoc(repo, 'a', 300, 1);
    const idx = make();
    idx.sync('c');
    const all = repo.chunksOfCollection('c').map((r) => r.id);
    const allowed = new Set(all.filter((_, i) => i % 60 === 0)); // 5 of 300
    const hits = idx.search('c', unit(7), 10, allowed);
    expect(hits).toHaveLength(5);
    expect(hits.map((h) => h.chunkId)).toEqual(exactTop(unit(7), [...allowed], 5));
  });

  it('fills k from the graph search when the filter allows more than an exact scan would take', () => {
    addDoc(repo, 'a', 2600, 3);
    const idx = make();
    idx.sync('c');
    const all = repo.chunksOfCollection('c').map((r) => r.id);
    const allowed = new Set(all.filter((_, i) => i % 13 !== 0)); // 2400 of 2600, above the exact-scan limit
    const hits = idx.search('c', unit(11), 10, allowed);
    expect(hits).toHaveLength(10);
    for (const h of hits) expect(allowed.has(h.chunkId)).toBe(true);
    const truth = new Set(exactTop(unit(11), [...allowed], 10));
    expect(hits.filter((h) => truth.has(h.chunkId)).length).toBeGreaterThanOrEqual(9);
  });

  it('patches the index when documents change: removed chunks never come back', () => {
    addDoc(repo, 'a', 10, 1);
    addDoc(repo, 'b', 10, 2);
    const idx = make();
    idx.sync('c');
    repo.deleteDocument(repo.getDocumentBySource('c', 'a.txt')!.id);
    const r = idx.sync('c');
    expect(r.removed).toBe(10);
    expect(r.size).toBe(10);
    const ids = new Set(repo.chunksOfCollection('c').map((x) => x.id));
    for (const h of idx.search('c', unit(103), 10)) expect(ids.has(h.chunkId)).toBe(true);
  });

  it('loads the saved file in a new process-like instance without rebuilding', () => {
    addDoc(repo, 'a', 10, 1);
    make().sync('c');
    const again = make().sync('c');
    expect(again.rebuilt).toBe(false);
    expect(again.added).toBe(0);
    expect(again.size).toBe(10);
  });

  it('rebuilds from the stored vectors when the index file is missing', () => {
    addDoc(repo, 'a', 10, 1);
    make().sync('c');
    for (const f of readdirSync(path.join(dir, 'index'))) if (f.endsWith('.hnsw')) rmSync(path.join(dir, 'index', f));
    const r = make().sync('c');
    expect(r.rebuilt).toBe(true);
    expect(r.size).toBe(10);
  });

  it('rebuilds when the index file is corrupt', () => {
    addDoc(repo, 'a', 10, 1);
    make().sync('c');
    for (const f of readdirSync(path.join(dir, 'index'))) if (f.endsWith('.hnsw')) writeFileSync(path.join(dir, 'index', f), 'garbage');
    const r = make().sync('c');
    expect(r.rebuilt).toBe(true);
    expect(r.size).toBe(10);
  });

  it('catches up when the database moved on after the file was saved', () => {
    addDoc(repo, 'a', 10, 1);
    make().sync('c');
    addDoc(repo, 'b', 5, 2); // written by another process; the file is one generation behind
    const r = make().sync('c');
    expect(r.added).toBe(5);
    expect(r.size).toBe(15);
  });

  it('never reuses a file built with another embedder', () => {
    addDoc(repo, 'a', 10, 1);
    make('emb').sync('c');
    const other = make('other');
    const r = other.sync('c');
    expect(r.rebuilt).toBe(true);
    expect(r.size).toBe(0); // no vectors of "other" are stored
  });

  it('leaves one index file per collection after saves', () => {
    addDoc(repo, 'a', 10, 1);
    const idx = make();
    idx.sync('c');
    addDoc(repo, 'b', 10, 2);
    idx.sync('c');
    const files = readdirSync(path.join(dir, 'index')).filter((f) => f.endsWith('.hnsw'));
    expect(files).toHaveLength(1);
    expect(existsSync(path.join(dir, 'index', 'c.meta.json'))).toBe(true);
  });
});
