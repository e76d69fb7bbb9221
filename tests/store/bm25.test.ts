import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { ftsColumns, openDatabase, SqliteStore, type Db, type Repository } from '../../src/store/index.js';

// BM25 as published by Robertson and Zaragoza, "The Probabilistic Relevance Framework: BM25 and
// Beyond" (Foundations and Trends in IR, 2009), eq. 3.15 with the Robertson/Sparck Jones idf without
// relevance information:
//   score(q, d) = sum_t  idf(t) * tf(t,d) * (k1 + 1) / (tf(t,d) + k1 * (1 - b + b * |d| / avgdl))
//   idf(t)      = ln((N - n(t) + 0.5) / (n(t) + 0.5))
// SQLite's FTS5 bm25() implements exactly this variant with k1 = 1.2 and b = 0.75 (sqlite.org/fts5.html,
// "The bm25() function"); it clamps a non-positive idf to 1e-6 and returns the score negated. Our
// repository negates it back. |d| counts tokens over all columns of the row; title and heading are
// empty here, so |d| is the body length.

const K1 = 1.2;
const B = 0.75;

// Words chosen so that the porter stemmer leaves them unchanged and none repeats across roles.
const corpus = [
  'tram fare refund tram',
  'bus fare',
  'tram depot shift roster',
  'refund claim form post',
  'bus stop shelter',
  'night bus timetable weekend',
];

function tokens(s: string): string[] {
  return s.split(/\s+/).filter(Boolean);
}

function handBm25(query: string[], docs: string[][]): number[] {
  const N = docs.length;
  const avgdl = docs.reduce((s, d) => s + d.length, 0) / N;
  return docs.map((d) => {
    let score = 0;
    for (const t of query) {
      const n = docs.filter((x) => x.includes(t)).length;
      if (n === 0) continue;
      let idf = Math.log((N - n + 0.5) / (n + 0.5));
      if (idf <= 0) idf = 1e-6;
      const tf = d.filter((x) => x === t).length;
      if (tf === 0) continue;
      score += (idf * tf * (K1 + 1)) / (tf + K1 * (1 - B + (B * d.length) / avgdl));
    }
    return score;
  });
}

describe('FTS5 BM25 against the published formula', () => {
  let db: Db;
  let repo: Repository;

  beforeEach(() => {
    db = openDatabase(':memory:');
    repo = new SqliteStore(db);
    repo.ensureCollection('c');
    corpus.forEach((text, i) => {
      repo.replaceDocument(
        {
          id: `d${i}`,
          collection: 'c',
          source: `d${i}.txt`,
          root: null,
          title: '',
          format: 'text',
          contentHash: `h${i}`,
          byteSize: text.length,
          pageCount: null,
          effectiveDate: null,
          metadata: {},
          text,
          settingsKey: 's',
        },
        [{ ordinal: 0, text, start: 0, end: text.length, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: `c${i}` }],
        new Map(),
        'm',
      );
    });
  });
  afterEach(() => db.close());

  for (const query of [['tram'], ['refund'], ['tram', 'refund'], ['bus', 'night'], ['fare', 'refund', 'claim']]) {
    it(`scores "${query.join(' ')}" as Robertson and Zaragoza's BM25 (k1 = 1.2, b = 0.75)`, () => {
      const expected = handBm25(query, corpus.map(tokens));
      const match = query.map((t) => `"${t}"`).join(' OR ');
      const rows = repo.searchFts('c', match, 100, { title: 1, heading: 1, body: 1 });
      const got = new Map(rows.map((r) => [r.chunkId, r.score]));
      // chunk ids are 1..6 in insertion order (AUTOINCREMENT on a fresh table)
      expected.forEach((score, i) => {
        if (score > 0) expect(got.get(i + 1)).toBeCloseTo(score, 6);
        else expect(got.has(i + 1)).toBe(false);
      });
      // Same ordering as the hand computation.
      const handOrder = expected
        .map((s, i) => ({ s, id: i + 1 }))
        .filter((x) => x.s > 0)
        .sort((a, b) => b.s - a.s)
        .map((x) => x.s);
      expect(rows.map((r) => r.score)).toEqual(handOrder.map((s) => expect.closeTo(s, 6)));
    });
  }

  it('clamps the idf of a term found in more than half of the documents to a tiny positive value, as FTS5 does', () => {
    // "bus" occurs in 3 of 6 documents: ln((6 - 3 + 0.5) / (3 + 0.5)) = 0, clamped to 1e-6.
    const rows = repo.searchFts('c', '"bus"', 10, { title: 1, heading: 1, body: 1 });
    expect(rows).toHaveLength(3);
    for (const r of rows) expect(r.score).toBeLessThan(1e-5);
  });

  it('searches only the named collection', () => {
    expect(repo.searchFts('other', '"tram"', 10, { title: 1, heading: 1, body: 1 })).toEqual([]);
  });
});

describe('FTS columns of a chunk', () => {
  it('indexes the title once: not again as a heading, nor as the heading line that opens the body', () => {
    const cols = ftsColumns('Delay refunds', ['Delay refunds', 'How to claim'], 'How to claim\n\nFill in the form within 28 days.');
    expect(cols).toEqual({ title: 'Delay refunds', heading: 'How to claim', body: 'Fill in the form within 28 days.' });
  });

  it('keeps a first line that is not a heading', () => {
    expect(ftsColumns('T', ['T'], 'Fares rise in May.\nMore text').body).toBe('Fares rise in May.\nMore text');
  });

  it('leaves an empty body for a chunk that is only its heading', () => {
    expect(ftsColumns('Lost property', ['Lost property'], 'Lost property').body).toBe('');
  });

  it('weights a title match by the title column weight (FTS5 multiplies tf by the column weight)', () => {
    const db = openDatabase(':memory:');
    const repo = new SqliteStore(db);
    repo.ensureCollection('c');
    const add = (id: string, title: string, text: string): void => {
      repo.replaceDocument(
        { id, collection: 'c', source: id, root: null, title, format: 'text', contentHash: id, byteSize: 1, pageCount: null, effectiveDate: null, metadata: { kind: id === 'a' ? 'policy' : 'notice' }, text, settingsKey: 's' },
        [{ ordinal: 0, text, start: 0, end: text.length, headingPath: [title], pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: id }],
        new Map(),
        'm',
      );
    };
    add('a', 'tram', 'depot shift');
    add('b', 'depot', 'tram shift');
    add('c', 'bus', 'stop shelter');
    const order = (title: number): number[] => repo.searchFts('c', '"tram"', 10, { title, heading: 1, body: 1 }).map((r) => r.chunkId);
    // Same tf and length for both: equal weights tie; a heavier title puts the title match first.
    expect(order(3)[0]).toBe(1);
    expect(order(0.2)[0]).toBe(2);
    expect(repo.searchFts('c', '"tram"', 10, { title: 1, heading: 1, body: 1 }, { metadata: { kind: 'notice' } }).map((r) => r.chunkId)).toEqual([2]);
    expect(repo.searchFts('c', '"tram"', 10, { title: 1, heading: 1, body: 1 }, { documentIds: [] })).toEqual([]);
    db.close();
  });
});
