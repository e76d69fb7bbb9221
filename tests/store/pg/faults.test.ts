import { afterAll, beforeAll, expect, it } from 'vitest';
import { openPgSystemOfRecord, type PgPool, type PgSystemOfRecord } from '../../../src/store/pg/index.js';
import { pgCorpus, type PgChunkInput } from '../../../src/store/pg/corpus.js';
import type { NewDocument } from '../../../src/store/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../../fixtures/pg.js';

// Fault injection (SQLite's testing habit): the Nth statement sent to the database fails, for N = 1, 2, ... until
// the write runs clean. After each failure the document must be wholly as before, with the change log, the
// counts and the vectors to match: never half replaced.

/** The pool, except that the `failAt`-th query through it (or any connection it hands out) fails. */
function failingPool(pool: PgPool, failAt: number): { pool: PgPool; sent: () => number } {
  let n = 0;
  const query = (target: { query: (...a: unknown[]) => Promise<unknown> }) => (...args: unknown[]) => {
    n++;
    return n === failAt ? Promise.reject(new Error(`injected failure at statement ${n}`)) : target.query(...args);
  };
  const wrapClient = <T extends object>(client: T): T =>
    new Proxy(client, {
      get(t, p) {
        if (p === 'query') return query(t as never);
        const v = Reflect.get(t, p) as unknown;
        return typeof v === 'function' ? (v as (...a: unknown[]) => unknown).bind(t) : v;
      },
    });
  const wrapped = new Proxy(pool, {
    get(t, p) {
      if (p === 'connect') return async () => wrapClient(await t.connect());
      if (p === 'query') return query(t as never);
      const v = Reflect.get(t, p) as unknown;
      return typeof v === 'function' ? (v as (...a: unknown[]) => unknown).bind(t) : v;
    },
  });
  return { pool: wrapped, sent: () => n };
}

const TEXT = 'Overnight loans close at five. Returns go to the desk by the north door.';
const doc = (hash: string): NewDocument => ({
  id: 'loans',
  collection: 'staff',
  source: 'loans.md',
  root: null,
  title: 'Overnight loans',
  format: 'markdown',
  contentHash: hash,
  byteSize: TEXT.length,
  pageCount: null,
  effectiveDate: null,
  metadata: {},
  settingsKey: 's',
  text: TEXT,
});
const chunks = (tag: string, n: number): PgChunkInput[] =>
  Array.from({ length: n }, (_, i) => ({ ordinal: i, text: TEXT.slice(i * 10, i * 10 + 10), start: i * 10, end: i * 10 + 10, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 3, chunkHash: `${tag}${i}` }));

describePg('PostgreSQL writes under injected failures', () => {
  let db: TestDatabase;
  let sor: PgSystemOfRecord;
  beforeAll(async () => {
    db = await createTestDatabase();
    sor = await openPgSystemOfRecord(db.url, { max: 4 });
  });
  afterAll(async () => {
    await sor?.close();
    await db?.drop();
  });

  const state = async () => ({
    doc: await sor.getDocument('loans'),
    chunks: (await sor.pool.query<{ id: number; chunk_hash: string }>("SELECT id, chunk_hash FROM chunks WHERE document_id = 'loans' ORDER BY id")).rows,
    collection: await sor.getCollection('staff'),
    head: await sor.changeHead(),
    versions: (await sor.pool.query<{ n: number }>("SELECT count(*)::int AS n FROM document_versions WHERE document_id = 'loans'")).rows[0]!.n,
    vectors: (await sor.pool.query<{ n: number }>("SELECT count(*)::int AS n FROM vectors WHERE chunk_hash LIKE 'new%'")).rows[0]!.n,
  });

  it('leaves a replaced document wholly old or wholly new whichever statement fails', async () => {
    await sor.replaceDocument(doc('old'), chunks('old', 3), new Map(), 'm');
    const before = await state();
    const vectors = new Map(chunks('new', 5).map((c, i) => [c.chunkHash, new Float32Array([i, 1])]));
    let failures = 0;
    for (let failAt = 1; ; failAt++) {
      const f = failingPool(sor.pool, failAt);
      const outcome = await pgCorpus(f.pool)
        .replaceDocument(doc('new'), chunks('new', 5), vectors, 'm')
        .then(() => 'done' as const, (e: Error) => e);
      if (outcome === 'done') {
        expect(f.sent()).toBe(failAt - 1);
        break;
      }
      expect(outcome.message).toBe(`injected failure at statement ${failAt}`);
      failures++;
      // Wholly as before.
      expect(await state()).toEqual(before);
    }
    expect(failures).toBeGreaterThan(8);
    const after = await state();
    expect(after.doc).toMatchObject({ contentHash: 'new', version: 2 });
    expect(after.chunks.map((c) => c.chunk_hash)).toEqual(['new0', 'new1', 'new2', 'new3', 'new4']);
    expect(after.collection).toMatchObject({ documents: 1, chunks: 5, generation: before.collection!.generation + 1 });
    // Positions a rolled-back write drew from the sequence are never used: the log has gaps, never stray rows.
    expect((await sor.changesSince(before.head)).entries.map((e) => e.kind)).toEqual([...Array(3).fill('chunk-removed'), ...Array(5).fill('chunk-added')]);
    expect([after.versions, after.vectors]).toEqual([2, 5]);
  });

  it('deletes a document wholly or not at all whichever statement fails', async () => {
    const before = await state();
    expect(before.chunks).toHaveLength(5);
    for (let failAt = 1; ; failAt++) {
      const f = failingPool(sor.pool, failAt);
      const outcome = await pgCorpus(f.pool)
        .deleteDocument('loans')
        .then((ids) => ids, (e: Error) => e);
      if (Array.isArray(outcome)) {
        expect(outcome).toEqual(before.chunks.map((c) => c.id));
        break;
      }
      expect(await state()).toEqual(before);
    }
    const after = await state();
    expect(after.doc).toBeNull();
    expect(after.chunks).toEqual([]);
    expect(after.collection).toMatchObject({ documents: 0, chunks: 0 });
    expect((await sor.changesSince(before.head)).entries.map((e) => [e.kind, e.chunkId])).toEqual(before.chunks.map((c) => ['chunk-removed', c.id]));
  });
});
