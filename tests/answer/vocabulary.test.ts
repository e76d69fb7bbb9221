import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { buildVocabulary, deleteVariants, osaDistance } from '../../src/answer/vocabulary.js';

describe('osaDistance (optimal string alignment, Damerau 1964)', () => {
  it('counts insertions, deletions, substitutions and adjacent transpositions', () => {
    expect(osaDistance('kitten', 'sitting')).toBe(3); // the textbook Levenshtein example (from memory)
    expect(osaDistance('recieve', 'receive')).toBe(1); // one transposition
    expect(osaDistance('apeal', 'appeal')).toBe(1);
    // OSA never edits a substring twice, so "ca" → "abc" costs 3, where unrestricted Damerau–Levenshtein
    // gives 2 (the usual example separating the two, from memory).
    expect(osaDistance('ca', 'abc')).toBe(3);
  });

  it('is a symmetric distance that is zero only for equal strings', () => {
    const word = fc.stringMatching(/^[a-e]{0,7}$/);
    fc.assert(
      fc.property(word, word, (a, b) => {
        expect(osaDistance(a, b)).toBe(osaDistance(b, a));
        expect(osaDistance(a, b) === 0).toBe(a === b);
        expect(osaDistance(a, b)).toBeLessThanOrEqual(Math.max(a.length, b.length));
      }),
    );
  });
});

describe('buildVocabulary', () => {
  const vocab = buildVocabulary([
    'Membership can be frozen for up to 6 months.\nPregnant members may freeze their membership.',
    'The library renews loans online.',
  ]);

  it('counts the lines that hold each stem', () => {
    expect(vocab.lines).toBe(3);
    expect(vocab.df('membership')).toBe(2);
    expect(vocab.df('unheard')).toBe(0);
    expect(vocab.hasWord('Library')).toBe(true);
  });

  it('corrects a misspelling to the nearest word the collection uses, and leaves known and short words alone', () => {
    expect(vocab.corrections('membersip')[0]?.word).toBe('membership');
    expect(vocab.corrections('freez')[0]?.word).toBe('freeze');
    expect(vocab.corrections('pregant')[0]?.word).toBe('pregnant');
    expect(vocab.corrections('library')).toEqual([]);
    expect(vocab.corrections('the')).toEqual([]);
    expect(vocab.corrections('zzzzzzzz')).toEqual([]);
  });

  it('finds exactly the words a brute-force scan finds within the distance limit (symmetric delete is complete)', () => {
    const words = ['membership', 'freeze', 'frozen', 'pregnant', 'members', 'library', 'renews', 'loans', 'online'];
    const v = buildVocabulary([words.join(' ')]);
    const probe = fc.stringMatching(/^[a-z]{4,9}$/);
    fc.assert(
      fc.property(probe, (p) => {
        if (words.includes(p)) return;
        const limit = p.length <= 5 ? 1 : 2;
        const brute = words.filter((w) => osaDistance(p, w) <= Math.min(limit, w.length <= 5 ? 1 : 2)).sort();
        expect(v.corrections(p).map((c) => c.word).sort()).toEqual(brute);
      }),
      { numRuns: 300 },
    );
  });

  it('indexes every deletion of up to n characters', () => {
    expect([...deleteVariants('abc', 1)].sort()).toEqual(['ab', 'abc', 'ac', 'bc']);
  });
});
