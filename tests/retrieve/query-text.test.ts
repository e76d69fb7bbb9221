import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { openDatabase, SqliteStore } from '../../src/store/index.js';
import { termCounts, toWeightedMatch } from '../../src/retrieve/query-text.js';

/** The content terms of a question, each once, as one FTS5 expression (as the retriever builds it, repeats aside). */
const contentTerms = (text: string): string[] => [...termCounts(text).keys()];
const toMatchExpression = (text: string): string | null => toWeightedMatch(contentTerms(text).map((term) => ({ term, weight: 1 })), { maxRepeat: 1 });

describe('query text to FTS5', () => {
  it('drops stop words and keeps the content words', () => {
    expect(contentTerms('How long do I have to claim a delay refund?')).toEqual(['long', 'claim', 'delay', 'refund']);
  });

  it('keeps all words when the question is only stop words', () => {
    expect(contentTerms('what is it')).toEqual(['what', 'is', 'it']);
  });

  it('returns null when nothing is searchable', () => {
    expect(toMatchExpression('?!  ...')).toBeNull();
  });

  it('never yields an expression FTS5 rejects, whatever the user types (property test)', () => {
    const db = openDatabase(':memory:');
    const repo = new SqliteStore(db);
    repo.ensureCollection('c');
    fc.assert(
      fc.property(fc.string({ unit: 'binary', maxLength: 200 }), (text) => {
        const match = toMatchExpression(text);
        if (match === null) return;
        expect(() => repo.searchFts('c', match, 5, { title: 1, heading: 1, body: 1 })).not.toThrow();
      }),
      { numRuns: 2000 },
    );
    db.close();
  });
});

describe('weighted FTS5 expressions', () => {
  it('repeats heavier terms in proportion, the heaviest maxRepeat times', () => {
    expect(toWeightedMatch([{ term: 'refund', weight: 1 }, { term: 'tram', weight: 0.5 }], { maxRepeat: 2 })).toBe('"refund" OR "refund" OR "tram"');
  });

  it('counts a repeated question word as its query term frequency', () => {
    expect([...termCounts('tram fares and tram passes')]).toEqual([['tram', 2], ['fares', 1], ['passes', 1]]);
  });

  it('repeating a phrase doubles its BM25 contribution in FTS5, which is what carries the weight', () => {
    const db = openDatabase(':memory:');
    const repo = new SqliteStore(db);
    repo.ensureCollection('c');
    const text = 'tram fare';
    repo.replaceDocument(
      { id: 'd', collection: 'c', source: 'd', root: null, title: '', format: 'text', contentHash: 'd', byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text, settingsKey: 's' },
      [{ ordinal: 0, text, start: 0, end: 9, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 2, chunkHash: 'h' }],
      new Map(),
      'm',
    );
    const w = { title: 1, heading: 1, body: 1 };
    const once = repo.searchFts('c', '"tram"', 1, w)[0]!.score;
    expect(repo.searchFts('c', '"tram" OR "tram"', 1, w)[0]!.score).toBeCloseTo(2 * once, 9);
    db.close();
  });
});
