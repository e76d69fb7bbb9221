import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { openDatabase, SqliteStore, type Db, type Repository } from '../../src/store/index.js';
import { toWeightedMatch } from '../../src/retrieve/query-text.js';
import { mulberry32 } from '../fixtures/random.js';

// searchFts lets FTS5 rank and cut to LIMIT before anything is joined, and with several collections in the
// one FTS table fetches more than asked and keeps the collection's rows. The reference here is the plain
// statement that joins every match to its collection before ranking (what the repository ran before): both
// must give the same chunks in the same order with the same scores.

const WORDS = ['tram', 'fare', 'refund', 'depot', 'roster', 'shelter', 'timetable', 'night', 'claim', 'ticket', 'ferry', 'pier'];

function reference(db: Db, collection: string, match: string, limit: number): { chunkId: number; score: number }[] {
  return db
    .prepare(
      `SELECT f.rowid AS chunkId, -bm25(chunks_fts, 2, 1, 1) AS score
       FROM chunks_fts f JOIN chunks k ON k.id = f.rowid JOIN documents d ON d.id = k.document_id
       WHERE chunks_fts MATCH ? AND d.collection = ? ORDER BY bm25(chunks_fts, 2, 1, 1), f.rowid LIMIT ?`,
    )
    .all(match, collection, limit) as { chunkId: number; score: number }[];
}

describe('searchFts ranks in FTS5 before joining', () => {
  let db: Db;
  let repo: Repository;
  beforeEach(() => {
    db = openDatabase(':memory:');
    repo = new SqliteStore(db);
  });
  afterEach(() => db.close());

  const fill = (collection: string, docs: number, seed: number) => {
    repo.ensureCollection(collection);
    const r = mulberry32(seed);
    for (let d = 0; d < docs; d++) {
      const chunks = [0, 1, 2].map((ordinal) => {
        const len = 5 + Math.floor(r() * 30);
        const text = Array.from({ length: len }, () => WORDS[Math.floor(r() * WORDS.length)]).join(' ');
        return { ordinal, text, start: 0, end: text.length, headingPath: [], pageStart: null, pageEnd: null, tokenCount: len, chunkHash: `${collection}-${d}-${ordinal}` };
      });
      repo.replaceDocument(
        { id: `${collection}-${d}`, collection, source: `${d}.txt`, root: null, title: `Notice ${d}`, format: 'text', contentHash: `${d}`, byteSize: 1, pageCount: null, effectiveDate: null, metadata: { group: String(d % 3) }, text: chunks.map((c) => c.text).join('\n\n'), settingsKey: 's' },
        chunks,
        new Map(),
        'm',
      );
    }
  };

  const same = (got: { chunkId: number; score: number }[], want: { chunkId: number; score: number }[]) => {
    expect(got.map((g) => g.chunkId)).toEqual(want.map((w) => w.chunkId));
    got.forEach((g, i) => expect(g.score).toBeCloseTo(want[i]!.score, 9));
  };

  it('one collection: the same ranking as the joined statement', () => {
    fill('a', 60, 1);
    for (const match of ['"tram"', '"refund" OR "claim"', '"ferry" OR "ferry" OR "pier" OR "night"']) {
      same(repo.searchFts('a', match, 10, { title: 2, heading: 1, body: 1 }), reference(db, 'a', match, 10));
    }
  });

  it('a small collection beside a large one still gets its own top k, in order', () => {
    fill('big', 200, 2);
    fill('small', 6, 3);
    for (const match of ['"tram"', '"refund" OR "claim" OR "pier"']) {
      const got = repo.searchFts('small', match, 10, { title: 2, heading: 1, body: 1 });
      same(got, reference(db, 'small', match, 10));
      expect(got.length).toBeGreaterThan(0);
      same(repo.searchFts('big', match, 25, { title: 2, heading: 1, body: 1 }), reference(db, 'big', match, 25));
    }
  });

  it('a metadata filter still counts LIMIT among the rows that pass it', () => {
    fill('a', 60, 4);
    const got = repo.searchFts('a', '"tram" OR "fare"', 10, { title: 2, heading: 1, body: 1 }, { metadata: { group: '1' } });
    expect(got).toHaveLength(10);
    const groups = db.prepare(`SELECT DISTINCT json_extract(d.metadata, '$.group') FROM chunks k JOIN documents d ON d.id = k.document_id WHERE k.id IN (SELECT value FROM json_each(?))`).pluck().all(JSON.stringify(got.map((g) => g.chunkId)));
    expect(groups).toEqual(['1']);
  });

  it('dividing repeat counts by their common divisor scales every score by that divisor and keeps the order', () => {
    fill('a', 60, 5);
    const terms = [{ term: 'tram', weight: 2 }, { term: 'refund', weight: 2 }, { term: 'night', weight: 4 }];
    const reduced = toWeightedMatch(terms, { maxRepeat: 4 });
    expect(reduced).toBe('"tram" OR "refund" OR "night" OR "night"');
    const full = '"tram" OR "tram" OR "refund" OR "refund" OR "night" OR "night" OR "night" OR "night"';
    const a = repo.searchFts('a', reduced!, 20, { title: 2, heading: 1, body: 1 });
    const b = repo.searchFts('a', full, 20, { title: 2, heading: 1, body: 1 });
    expect(a.map((x) => x.chunkId)).toEqual(b.map((x) => x.chunkId));
    a.forEach((x, i) => expect(b[i]!.score).toBeCloseTo(2 * x.score, 9));
  });

  it('collectionState reads the row without counting; chunkTexts and chunkVectors read by chunk id', () => {
    repo.ensureCollection('a');
    const v = Float32Array.from([0.6, 0.8]);
    const { chunkIds } = repo.replaceDocument(
      { id: 'd', collection: 'a', source: 'd.txt', root: null, title: 'T', format: 'text', contentHash: 'c', byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text: 'tram fare', settingsKey: 's' },
      [{ ordinal: 0, text: 'tram fare', start: 0, end: 9, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 2, chunkHash: 'h' }],
      new Map([['h', v]]),
      'm',
    );
    expect(repo.collectionState('a')).toEqual({ name: 'a', embedderId: null, dimensions: null, generation: 1 });
    expect(repo.collectionState('nope')).toBeNull();
    expect(repo.chunkTexts(chunkIds)).toEqual(new Map([[chunkIds[0]!, 'tram fare']]));
    expect([...repo.chunkVectors('m', chunkIds).get(chunkIds[0]!)!]).toEqual([...v]);
    expect(repo.chunkVectors('other', chunkIds).size).toBe(0);
  });
});
