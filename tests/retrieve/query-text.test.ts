import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { createRepository, openDatabase } from '../../src/store/index.js';
import { contentTerms, toMatchExpression } from '../../src/retrieve/query-text.js';

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
    const repo = createRepository(db);
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
