import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { createVectorIndexes, openDatabase, SqliteStore, type Db, type Repository, type VectorIndexes } from '../../src/store/index.js';
import { withDeadline } from '../fixtures/wait.js';
import { mulberry32 as rng } from '../fixtures/random.js';

// The vector index changes in place: a writer adds a document's points and marks a removed document's points
// deleted (hnswlib's addPoint / markDelete), saves the file with the generation it holds, and readers load that
// file instead of adding the points again. The service's HNSW settings (src/config/schema.ts defaults).
const DIMS = 32;
const params = { m: 16, efConstruction: 200, efSearch: 128 };

function unitVector(rand: () => number): Float32Array {
  const v = new Float32Array(DIMS);
  for (let i = 0; i < DIMS; i++) v[i] = rand() * 2 - 1;
  const n = Math.hypot(...v);
  return v.map((x) => x / n);
}

describe('a vector index changed in place', () => {
  let dir: string;
  let db: Db;
  let repo: Repository;
  const rand = rng(20261204);
  const vectorOf = new Map<string, Float32Array>();

  beforeEach(() => {
    dir = mkdtempSync(path.join(tmpdir(), 'sb-hnsw-place-'));
    db = openDatabase(path.join(dir, 'db.sqlite'));
    repo = new SqliteStore(db);
    repo.ensureCollection('c');
  });
  afterEach(() => {
    db.close();
    rmSync(dir, { recursive: true, force: true });
  });

  const make = (): VectorIndexes => createVectorIndexes({ repo, dir: path.join(dir, 'index'), embedderId: 'emb', dimensions: DIMS, params });

  /** Writes a document of `n` chunks with fresh random vectors and tells `idx` as the pipeline does. */
  const write = (idx: VectorIndexes | null, id: string, n: number): boolean => {
    const chunks = Array.from({ length: n }, (_, i) => ({
      ordinal: i, text: `${id}-${i}`, start: 0, end: 1, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: `${id}-${i}-${vectorOf.size}`,
    }));
    const vectors = new Map(chunks.map((c) => [c.chunkHash, unitVector(rand)]));
    for (const [h, v] of vectors) vectorOf.set(h, v);
    const r = repo.replaceDocument(
      { id, collection: 'c', source: `${id}.txt`, root: null, title: id, format: 'text', contentHash: id, byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text: 'x', settingsKey: 's' },
      chunks,
      vectors,
      'emb',
    );
    return idx ? idx.apply('c', { generation: r.generation, removed: r.removedChunkIds, added: r.chunkIds.map((cid, i) => ({ id: cid, vector: vectors.get(chunks[i]!.chunkHash)! })) }) : false;
  };
  const remove = (idx: VectorIndexes, id: string): boolean => {
    const removed = repo.deleteDocument(id);
    return idx.apply('c', { generation: repo.collectionState('c')!.generation, removed, added: [] });
  };

  // Reference: exact cosine similarity (inner product of unit vectors) over every stored chunk.
  const exactTop = (q: Float32Array, k: number): number[] => {
    const rows = repo.chunksOfCollection('c');
    return rows
      .map((r) => {
        const v = vectorOf.get(r.chunkHash)!;
        let s = 0;
        for (let i = 0; i < DIMS; i++) s += v[i]! * q[i]!;
        return { id: r.id, s };
      })
      .sort((a, b) => b.s - a.s || a.id - b.id)
      .slice(0, k)
      .map((x) => x.id);
  };
  const recallAt10 = (idx: VectorIndexes, queries: number): number => {
    let found = 0;
    for (let i = 0; i < queries; i++) {
      const q = unitVector(rand);
      const truth = new Set(exactTop(q, 10));
      found += idx.search('c', q, 10).filter((h) => truth.has(h.chunkId)).length;
    }
    return found / (queries * 10);
  };

  it('keeps recall@10 at 0.99 or more against exact cosine search through seeded adds, updates and deletions', () => {
    const idx = make();
    for (let d = 0; d < 100; d++) write(null, `d${d}`, 20);
    idx.sync('c');
    let inPlace = 0;
    let live = Array.from({ length: 100 }, (_, d) => `d${d}`);
    for (let step = 0; step < 150; step++) {
      const r = rand();
      if (r < 0.4) {
        const id = `n${step}`;
        inPlace += write(idx, id, 20) ? 1 : 0;
        live.push(id);
      } else if (r < 0.7) {
        inPlace += write(idx, live[Math.floor(rand() * live.length)]!, 20) ? 1 : 0; // an update: new chunk ids
      } else {
        const id = live[Math.floor(rand() * live.length)]!;
        inPlace += remove(idx, id) ? 1 : 0;
        live = live.filter((x) => x !== id);
      }
    }
    expect(inPlace).toBe(150); // every change went in place: none needed a check against the database
    expect(idx.size('c')).toBe(repo.chunksOfCollection('c').length);
    // With the tombstones still in the graph (hnswlib searches through deleted points without returning them).
    expect(idx.deletedCount('c')).toBeGreaterThan(1000);
    expect(recallAt10(idx, 200)).toBeGreaterThanOrEqual(0.99);
    const s = idx.sync('c');
    expect(s).toMatchObject({ added: 0, removed: 0, rebuilt: false });
    expect(s.size).toBe(repo.chunksOfCollection('c').length);
    // And as a reader loads it from the file the writer saved (compacted by then).
    const reader = make();
    reader.sync('c', { persist: false });
    expect(recallAt10(reader, 200)).toBeGreaterThanOrEqual(0.99);
  });

  /** A reader's read of a later file, which runs off the thread, to its end. */
  const settled = (idx: VectorIndexes) => withDeadline(idx.settled('c'), { what: 'the reader to read the later index file', timeoutMs: 10_000 });

  it('lets a reader load the file a writer saved, without adding points itself, and keep what it has until then', async () => {
    const writer = make();
    for (let d = 0; d < 10; d++) write(writer, `d${d}`, 5);
    writer.sync('c');
    const reader = make();
    expect(reader.sync('c', { persist: false })).toMatchObject({ size: 50, added: 0, rebuilt: false });
    // Written, not yet saved: the reader keeps the index it has (the query path never patches).
    expect(write(writer, 'd10', 5)).toBe(true);
    expect(reader.sync('c', { persist: false })).toMatchObject({ size: 50, added: 0, rebuilt: false });
    // Saved: the reader reads the file off the thread, answering from what it has meanwhile.
    writer.sync('c');
    expect(reader.sync('c', { persist: false })).toEqual({ size: 50, added: 0, removed: 0, rebuilt: false, loading: true });
    await settled(reader);
    expect(reader.size('c')).toBe(55);
    expect(reader.sync('c', { persist: false })).toEqual({ size: 55, added: 0, removed: 0, rebuilt: false });
    expect(remove(writer, 'd3')).toBe(true);
    writer.sync('c');
    expect(reader.sync('c', { persist: false })).toMatchObject({ size: 55, loading: true });
    await settled(reader);
    expect(reader.size('c')).toBe(50);
    const gone = new Set(repo.chunksOfDocuments(['d3']).map((r) => r.id));
    expect(gone.size).toBe(0);
    const present = new Set(repo.chunksOfCollection('c').map((r) => r.id));
    for (const h of reader.search('c', unitVector(rand), 50)) expect(present.has(h.chunkId)).toBe(true);
  });

  it('applies a change made by another writer after loading that writer\'s file', () => {
    const a = make();
    const b = make();
    for (let d = 0; d < 4; d++) write(a, `d${d}`, 5);
    a.sync('c');
    expect(write(b, 'd4', 5)).toBe(true); // b had no index: it loads a's file, which holds the generation before
    b.sync('c');
    expect(write(a, 'd5', 5)).toBe(true); // a is behind b's save: it loads b's file first
    expect(a.sync('c')).toMatchObject({ added: 0, removed: 0, rebuilt: false, size: 30 });
  });

  it('compacts on the writer once a quarter of the graph is tombstones, after saving, and never on the query path', async () => {
    const writer = make();
    for (let d = 0; d < 40; d++) write(writer, `d${d}`, 20);
    writer.sync('c');
    const reader = make();
    reader.sync('c', { persist: false });
    for (let d = 0; d < 15; d++) remove(writer, `d${d}`); // 300 of 800 points deleted
    // A reader whose database moved on with no saved file keeps its graph: no rebuild on the query path.
    expect(reader.sync('c', { persist: false })).toMatchObject({ rebuilt: false, size: 800 });
    const s = writer.sync('c');
    expect(s).toMatchObject({ compacted: true, size: 500, rebuilt: false });
    expect(writer.deletedCount('c')).toBe(0);
    expect(readdirSync(path.join(dir, 'index')).filter((f) => f.endsWith('.hnsw'))).toHaveLength(1);
    expect(reader.sync('c', { persist: false })).toMatchObject({ loading: true, size: 800 });
    await settled(reader);
    expect(reader.size('c')).toBe(500);
    expect(reader.deletedCount('c')).toBe(0);
    expect(recallAt10(reader, 100)).toBeGreaterThanOrEqual(0.99);
  });

  it('answers a query during the read of a later file from the index it has, without waiting for the read', async () => {
    const writer = make();
    for (let d = 0; d < 20; d++) write(writer, `d${d}`, 10);
    writer.sync('c');
    const reader = make();
    reader.sync('c', { persist: false });
    const before = new Set(repo.chunksOfCollection('c').map((r) => r.id));
    expect(write(writer, 'late', 5)).toBe(true);
    writer.sync('c');
    const late = repo.chunksOfDocuments(['late']).map((r) => r.id);
    const probe = vectorOf.get(repo.chunksOfCollection('c').find((r) => r.id === late[0])!.chunkHash)!;
    // The read starts and the query is answered in the same turn of the event loop: the read cannot have ended,
    // and the answer comes from the 200 points the reader had (the late document's own vector is not among them).
    expect(reader.sync('c', { persist: false })).toMatchObject({ loading: true, size: 200 });
    const during = reader.search('c', probe, 10);
    expect(during).toHaveLength(10);
    for (const h of during) expect(before.has(h.chunkId)).toBe(true);
    // A second query while the read is still under way starts no second read.
    expect(reader.sync('c', { persist: false })).toMatchObject({ loading: true, size: 200 });
    await settled(reader);
    expect(reader.size('c')).toBe(205);
    expect(reader.search('c', probe, 1)[0]!.chunkId).toBe(late[0]);
  });

  it('keeps a change written on the reader\'s own thread when an older file\'s read ends after it', async () => {
    const writer = make();
    for (let d = 0; d < 5; d++) write(writer, `d${d}`, 4);
    writer.sync('c');
    const reader = make();
    reader.sync('c', { persist: false });
    expect(write(writer, 'w', 4)).toBe(true);
    writer.sync('c');
    expect(reader.sync('c', { persist: false })).toMatchObject({ loading: true, size: 20 });
    // Before the read ends, this thread writes too (as the request thread deleting a document does): it loads
    // the writer's file at once to apply its change, saves, and the read that started before is dropped when it
    // ends (installing it would bring back the deleted document's points).
    expect(remove(reader, 'd0')).toBe(true);
    expect(reader.sync('c')).toMatchObject({ size: 20 });
    await settled(reader);
    expect(reader.size('c')).toBe(20);
    const present = new Set(repo.chunksOfCollection('c').map((r) => r.id));
    for (const h of reader.search('c', unitVector(rand), 20)) expect(present.has(h.chunkId)).toBe(true);
  });

  it('scans a selective filter exactly from its vector cache, kept in step with changes applied in place', async () => {
    const writer = make();
    for (let d = 0; d < 30; d++) write(writer, `d${d}`, 10);
    writer.sync('c');
    const reader = make();
    reader.sync('c', { persist: false });
    const rows = repo.chunksOfCollection('c');
    const allowed = new Set(rows.filter((r) => r.id % 7 === 0).map((r) => r.id));
    const q = unitVector(rand);
    // Reference: exact inner product over the allowed chunks' stored vectors.
    const exact = (ids: ReadonlySet<number>) =>
      repo
        .chunksOfCollection('c')
        .filter((r) => ids.has(r.id))
        .map((r) => ({ id: r.id, s: vectorOf.get(r.chunkHash)!.reduce((a, x, i) => a + x * q[i]!, 0) }))
        .sort((a, b) => b.s - a.s)
        .slice(0, 10)
        .map((r) => r.id);
    expect(reader.cachedVectors('c')).toBe(0);
    expect(reader.search('c', q, 10, allowed).map((h) => h.chunkId)).toEqual(exact(allowed));
    await settled(reader);
    expect(reader.cachedVectors('c')).toBe(300);
    expect(reader.search('c', q, 10, allowed).map((h) => h.chunkId)).toEqual(exact(allowed));
    // Changes applied on this thread keep the cache in step: new points in, removed ones out.
    expect(write(reader, 'n', 10)).toBe(true);
    expect(remove(reader, 'd1')).toBe(true);
    expect(reader.cachedVectors('c')).toBe(300);
    const now = new Set(repo.chunksOfCollection('c').filter((r) => r.id % 7 === 0 || r.id > Math.max(...allowed)).map((r) => r.id));
    expect(reader.search('c', q, 10, now).map((h) => h.chunkId)).toEqual(exact(now));
  });

  it('grows a new collection\'s graph in place from its first document, and declines when it cannot know the collection was empty', () => {
    const first = make();
    expect(write(first, 'd0', 6)).toBe(true);
    expect(write(first, 'd1', 6)).toBe(true);
    expect(first.size('c')).toBe(12);
    expect(first.sync('c')).toMatchObject({ added: 0, removed: 0, rebuilt: false, size: 12 });
    // Another collection with chunks but no saved file: an index with no state cannot start empty there.
    repo.ensureCollection('other');
    const chunks = [{ ordinal: 0, text: 'x', start: 0, end: 1, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: 'other-0' }];
    const doc = (id: string) => ({ id, collection: 'other', source: `${id}.txt`, root: null, title: id, format: 'text' as const, contentHash: id, byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text: 'x', settingsKey: 's' });
    repo.replaceDocument(doc('o1'), chunks, new Map([['other-0', unitVector(rand)]]), 'emb');
    const later = repo.replaceDocument(doc('o2'), [{ ...chunks[0]!, chunkHash: 'other-1' }], new Map([['other-1', unitVector(rand)]]), 'emb');
    const idx = make();
    expect(idx.apply('other', { generation: later.generation, removed: [], added: [{ id: later.chunkIds[0]!, vector: unitVector(rand) }] })).toBe(false);
    expect(idx.sync('other')).toMatchObject({ rebuilt: true, size: 2 });
  });

  it('removes, when it saves, the temporaries a killed process left, and no live process\'s', () => {
    const idx = make();
    write(idx, 'd0', 4);
    idx.sync('c');
    const indexDir = path.join(dir, 'index');
    // No process can have a pid above the kernel's limit: that process is certainly gone.
    const gone = Number(readFileSync('/proc/sys/kernel/pid_max', 'utf8').trim()) + 1;
    writeFileSync(path.join(indexDir, `c.g7.hnsw.tmp-${gone}-0`), 'half a save');
    writeFileSync(path.join(indexDir, `c.meta.json.tmp-${gone}-3`), '{');
    writeFileSync(path.join(indexDir, `c.g8.hnsw.tmp-${process.ppid}-0`), 'a save under way');
    write(idx, 'd1', 4);
    idx.sync('c');
    const left = readdirSync(indexDir).filter((f) => f.includes('.tmp-'));
    expect(left).toEqual([`c.g8.hnsw.tmp-${process.ppid}-0`]);
  });
});


describe('a vector graph that is dropped', () => {
  it('gives its native memory back at once: release leaves a one-point graph with nothing in it', async () => {
    const { newIndex } = await import('../../src/store/hnsw-files.js');
    const { release } = await import('../../src/store/hnsw-state.js');
    const index = newIndex(DIMS, 500, params);
    const rand = rng(7);
    for (let i = 0; i < 300; i++) index.addPoint(Array.from(unitVector(rand)), i);
    expect(index.getCurrentCount()).toBe(300);
    release(index);
    expect(index.getCurrentCount()).toBe(0);
    expect(index.getMaxElements()).toBe(1);
  });
});
