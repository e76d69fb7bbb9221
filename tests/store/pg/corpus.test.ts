import { afterAll, beforeAll, expect, it } from 'vitest';
import { openPgSystemOfRecord, type PgChunkInput, type PgSystemOfRecord } from '../../../src/store/pg/index.js';
import type { NewDocument } from '../../../src/store/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../../fixtures/pg.js';

// Documents of the project's scenario (DESIGN.md): the reading room's handbook, split by hand into chunks.
const TEXT = '# Opening hours\nThe reading room opens at nine.\n# Lending\nRare volumes stay in the room.';
const doc = (over: Partial<NewDocument> = {}): NewDocument => ({
  id: 'handbook',
  collection: 'staff',
  source: 'handbook.md',
  root: '/srv/docs',
  title: 'Reading room handbook',
  format: 'markdown',
  contentHash: 'a'.repeat(64),
  byteSize: TEXT.length,
  pageCount: null,
  effectiveDate: '2026-01-05',
  metadata: { version: 'Issue 4', team: 'desk' },
  settingsKey: 'hashing-4096/180/256/32',
  text: TEXT,
  ...over,
});
const chunkAt = (ordinal: number, start: number, end: number, hash: string, extra: Partial<PgChunkInput> = {}): PgChunkInput => ({
  ordinal,
  text: TEXT.slice(start, end),
  start,
  end,
  headingPath: [ordinal === 0 ? 'Opening hours' : 'Lending'],
  pageStart: 1,
  pageEnd: 1,
  tokenCount: 8,
  chunkHash: hash,
  ...extra,
});
const CHUNKS = [chunkAt(0, 0, 47, 'h0'), chunkAt(1, 48, TEXT.length, 'h1', { pageEnd: 2, pageBreaks: [{ at: 60, page: 2 }], metadata: { kind: 'rule' } })];
const vec = (...xs: number[]) => new Float32Array(xs);

describePg('the PostgreSQL corpus and its change log', () => {
  let db: TestDatabase;
  let sor: PgSystemOfRecord;
  beforeAll(async () => {
    db = await createTestDatabase();
    sor = await openPgSystemOfRecord(db.url, { max: 6 });
  });
  afterAll(async () => {
    await sor?.close();
    await db?.drop();
  });

  it('creates a collection once, and logs its creation', async () => {
    const head = await sor.changeHead();
    expect(await sor.ensureCollection('staff')).toBe(true);
    expect(await sor.ensureCollection('staff')).toBe(false);
    expect(await sor.getCollection('staff')).toEqual({ name: 'staff', embedderId: null, dimensions: null, generation: 0, documents: 0, chunks: 0 });
    const batch = await sor.changesSince(head);
    expect(batch.entries.map((e) => [e.kind, e.collection])).toEqual([['collection-created', 'staff']]);
  });

  it('stores a document with its chunks, offsets, pages, metadata and vectors in one transaction, and logs each chunk', async () => {
    const head = await sor.changeHead();
    const vectors = new Map([['h0', vec(0.5, -0.25, 1)], ['h1', vec(0.125, 2, -3)]]);
    const r = await sor.replaceDocument(doc(), CHUNKS, vectors, 'hashing-3');
    expect(r.removedChunkIds).toEqual([]);
    expect(r.chunkIds).toHaveLength(2);
    expect(r.version).toBe(1);
    expect(r.generation).toBe(1);

    const stored = await sor.getDocument('handbook');
    expect(stored).toMatchObject({ collection: 'staff', source: 'handbook.md', contentHash: 'a'.repeat(64), metadata: { version: 'Issue 4', team: 'desk' }, version: 1 });
    expect(await sor.getDocumentText('handbook')).toBe(TEXT);
    const views = await sor.chunkViews(r.chunkIds);
    const second = views.get(r.chunkIds[1]!)!;
    expect(second).toMatchObject({ documentId: 'handbook', title: 'Reading room handbook', start: 48, end: TEXT.length, headingPath: ['Lending'], pageStart: 1, pageEnd: 2, version: 'Issue 4' });
    expect(second.pageBreaks).toEqual([{ at: 60, page: 2 }]);
    // Offsets point into the stored text exactly.
    expect(TEXT.slice(second.start, second.end)).toBe(second.text);
    expect((await sor.pool.query('SELECT metadata FROM chunks WHERE id = $1', [r.chunkIds[1]])).rows[0].metadata).toEqual({ kind: 'rule' });
    // float32 round trip, bit for bit (0.125, 2 and -3 are exact in binary)
    expect([...(await sor.chunkVectors('hashing-3', r.chunkIds)).get(r.chunkIds[1]!)!]).toEqual([0.125, 2, -3]);
    expect(await sor.getCollection('staff')).toMatchObject({ documents: 1, chunks: 2, generation: 1 });

    const log = await sor.changesSince(head);
    expect(log.entries.map((e) => [e.kind, e.chunkId, e.generation])).toEqual([
      ['chunk-added', r.chunkIds[0], 1],
      ['chunk-added', r.chunkIds[1], 1],
    ]);
  });

  it('reads many documents in one snapshot exactly as it reads each one alone, leaving out those it does not hold', async () => {
    await sor.replaceDocument(doc({ id: 'timetable', collection: 'timetables', source: 'timetable.md', contentHash: 'd'.repeat(64) }), [chunkAt(0, 0, 20, 'h7', { metadata: { kind: 'hours' } })], new Map([['h7', vec(1, 2, 4)]]), 'hashing-3');
    const many = await sor.documentCopies(['timetable', 'no-such-document', 'handbook'], 'hashing-3');
    expect([...many.keys()].sort()).toEqual(['handbook', 'timetable']);
    for (const id of ['handbook', 'timetable']) {
      const one = (await sor.documentCopy(id, 'hashing-3'))!;
      expect(many.get(id)).toEqual(one);
      // Each document gets its own chunks and only their vectors.
      expect(one.chunks.every((c) => one.vectors.has(c.chunkHash))).toBe(true);
      expect([...one.vectors.keys()].sort()).toEqual([...new Set(one.chunks.map((c) => c.chunkHash))].sort());
    }
    expect(many.get('timetable')!.chunks.map((c) => c.metadata)).toEqual([{ kind: 'hours' }]);
    expect(await sor.documentCopies([], 'hashing-3')).toEqual(new Map());
    await sor.deleteDocument('timetable');
  });

  it('replaces a document as a new version: old chunks logged as removed, new ids never reused', async () => {
    const old = (await sor.pool.query<{ id: number }>("SELECT id FROM chunks WHERE document_id = 'handbook' ORDER BY id")).rows.map((x) => x.id);
    expect(old).toHaveLength(2);
    const head = await sor.changeHead();
    const r = await sor.replaceDocument(doc({ contentHash: 'b'.repeat(64) }), [chunkAt(0, 0, TEXT.length, 'h2')], new Map(), 'hashing-3');
    expect(r.removedChunkIds).toEqual(old);
    expect(Math.min(...r.chunkIds)).toBeGreaterThan(Math.max(...old));
    expect(r.version).toBe(2);
    expect(await sor.getCollection('staff')).toMatchObject({ documents: 1, chunks: 1, generation: 2 });
    const versions = (await sor.pool.query("SELECT version, content_hash, chunk_count FROM document_versions WHERE document_id = 'handbook' ORDER BY version")).rows;
    expect(versions).toEqual([
      { version: 1, content_hash: 'a'.repeat(64), chunk_count: 2 },
      { version: 2, content_hash: 'b'.repeat(64), chunk_count: 1 },
    ]);
    const log = await sor.changesSince(head);
    expect(log.entries.map((e) => [e.kind, e.chunkId])).toEqual([...old.map((id) => ['chunk-removed', id]), ['chunk-added', r.chunkIds[0]]]);
    expect(log.entries.every((e, i, all) => i === 0 || e.position > all[i - 1]!.position)).toBe(true);
  });

  it('leaves everything as it was when a replacement fails part-way', async () => {
    await sor.replaceDocument(doc({ id: 'rota', source: 'rota.md', contentHash: 'c'.repeat(64) }), [chunkAt(0, 0, 10, 'h3')], new Map(), 'hashing-3');
    const head = await sor.changeHead();
    const counts = await sor.getCollection('staff');
    const chunksBefore = (await sor.pool.query("SELECT id FROM chunks WHERE document_id = 'rota'")).rows;
    // Another document's source: the unique (collection, source) fails after the old chunks were deleted.
    await expect(sor.replaceDocument(doc({ id: 'rota', source: 'handbook.md' }), [chunkAt(0, 0, 5, 'h4')], new Map(), 'hashing-3')).rejects.toThrow(/unique|duplicate/i);
    expect((await sor.pool.query("SELECT id FROM chunks WHERE document_id = 'rota'")).rows).toEqual(chunksBefore);
    expect(await sor.getDocument('rota')).toMatchObject({ source: 'rota.md', version: 1 });
    expect(await sor.getCollection('staff')).toEqual(counts);
    expect(await sor.changeHead()).toBe(head);
  });

  it('refuses chunks whose offsets run backwards or whose ordinals repeat, before writing anything', async () => {
    await expect(sor.replaceDocument(doc({ id: 'bad', source: 'bad.md' }), [chunkAt(0, 9, 3, 'x')], new Map(), 'm')).rejects.toThrow(/offsets \[9, 3\)/);
    await expect(sor.replaceDocument(doc({ id: 'bad', source: 'bad.md' }), [chunkAt(0, 0, 3, 'x'), chunkAt(0, 3, 6, 'y')], new Map(), 'm')).rejects.toThrow(/not distinct/);
    expect(await sor.getDocument('bad')).toBeNull();
  });

  it('deletes a document with its chunks and logs each removal; deleting it again changes nothing', async () => {
    const ids = (await sor.pool.query<{ id: number }>("SELECT id FROM chunks WHERE document_id = 'rota' ORDER BY id")).rows.map((x) => x.id);
    const head = await sor.changeHead();
    const gen = (await sor.getCollection('staff'))!.generation;
    expect(await sor.deleteDocument('rota')).toEqual(ids);
    expect(await sor.getDocument('rota')).toBeNull();
    expect(await sor.chunkViews(ids)).toEqual(new Map());
    expect(await sor.getCollection('staff')).toMatchObject({ documents: 1, chunks: 1, generation: gen + 1 });
    expect((await sor.changesSince(head)).entries.map((e) => [e.kind, e.chunkId, e.documentId, e.generation])).toEqual(
      ids.map((id) => ['chunk-removed', id, 'rota', gen + 1]),
    );
    expect(await sor.deleteDocument('rota')).toEqual([]);
    expect(await sor.changeHead()).toBe(head + ids.length);
  });

  it('reads the change log in pages from any position', async () => {
    const all = (await sor.changesSince(0, 1_000_000)).entries;
    expect(all.length).toBeGreaterThan(5);
    const paged = [];
    let at = 0;
    for (let batch = await sor.changesSince(at, 2); ; batch = await sor.changesSince(at, 2)) {
      expect(batch.entries.length).toBeLessThanOrEqual(2);
      paged.push(...batch.entries);
      at = batch.head;
      if (!batch.more) break;
    }
    expect(paged).toEqual(all);
    expect(await sor.changesSince(at)).toEqual({ head: at, entries: [], more: false });
    await expect(sor.changesSince(-1)).rejects.toThrow(/non-negative/);
  });

  it('never lets a reader following the log skip a position while writers commit concurrently', async () => {
    const start = await sor.changeHead();
    const seen: number[] = [];
    let writing = true;
    const reader = (async () => {
      let at = start;
      for (;;) {
        const done = !writing;
        const batch = await sor.changesSince(at, 50);
        seen.push(...batch.entries.map((e) => e.position));
        at = batch.head;
        if (done && !batch.more) return;
      }
    })();
    const writers = Array.from({ length: 6 }, async (_, w) => {
      for (let i = 0; i < 8; i++) {
        const id = `w${w}-${i % 3}`;
        const chunks = Array.from({ length: 1 + ((w + i) % 4) }, (_, o) => chunkAt(o, o, o + 1, `w${w}i${i}o${o}`));
        await sor.replaceDocument(doc({ id, source: `${id}.md`, collection: w % 2 ? 'staff' : 'public' }), chunks, new Map(), 'm');
        if (i % 4 === 3) await sor.deleteDocument(id);
      }
    });
    await Promise.all(writers);
    writing = false;
    await reader;
    const inTable = (await sor.pool.query<{ position: number }>('SELECT position FROM change_log WHERE position > $1 ORDER BY position', [start])).rows.map((r) => r.position);
    expect(inTable.length).toBeGreaterThan(48);
    // Seen in order, each once, and none missing.
    expect(seen).toEqual(inTable);
  });
});
