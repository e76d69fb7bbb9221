import { describe, expect, it } from 'vitest';
import { rm3Expand } from '../../src/retrieve/rm3.js';

// Worked by hand from the RM3 definition (Lavrenko and Croft 2001; interpolation as in Abdul-Jaleel et al.,
// TREC 2004): P(t|R) = sum_d P(t|d) P(d|q), normalised over the kept terms, then λ P(t|q) + (1 − λ) P(t|R).
describe('RM3 query expansion', () => {
  it('weights feedback terms by their share in each document times the document weight', () => {
    // Scores 3 and 1 → P(d|q) = 0.75 and 0.25. Doc 1 "tram depot tram" (3 words), doc 2 "depot fare" (2).
    // P(tram|R) = 0.75·2/3 = 0.5; P(depot|R) = 0.75·1/3 + 0.25·1/2 = 0.375; P(fare|R) = 0.125. Sum = 1.
    // Query "tram" once: P(tram|q) = 1. λ = 0.5:
    //   tram = 0.5·1 + 0.5·0.5 = 0.75, depot = 0.5·0.375 = 0.1875, fare = 0.5·0.125 = 0.0625.
    const out = rm3Expand(new Map([['tram', 1]]), [{ text: 'tram depot tram', score: 3 }, { text: 'depot fare', score: 1 }], { docs: 10, terms: 10, originalWeight: 0.5 });
    expect(out.map((t) => t.term)).toEqual(['tram', 'depot', 'fare']);
    expect(out[0]!.weight).toBeCloseTo(0.75, 10);
    expect(out[1]!.weight).toBeCloseTo(0.1875, 10);
    expect(out[2]!.weight).toBeCloseTo(0.0625, 10);
  });

  it('keeps only the strongest feedback terms and renormalises them', () => {
    // With terms = 1 only "tram" (0.5) is kept, renormalised to 1: tram = 0.5 + 0.5 = 1.
    const out = rm3Expand(new Map([['bus', 1]]), [{ text: 'tram depot tram', score: 3 }, { text: 'depot fare', score: 1 }], { docs: 10, terms: 1, originalWeight: 0.5 });
    expect(out).toEqual([{ term: 'bus', weight: 0.5 }, { term: 'tram', weight: 0.5 }]);
  });

  it('ignores stop words and digits in feedback text and returns the original query without feedback', () => {
    const out = rm3Expand(new Map([['refund', 2]]), [{ text: 'the 2024 refund of the fare', score: 1 }], { docs: 1, terms: 5, originalWeight: 0.5 });
    expect(out.map((t) => t.term).sort()).toEqual(['fare', 'refund']);
    expect(rm3Expand(new Map([['refund', 2]]), [])).toEqual([{ term: 'refund', weight: 0.5 }]);
  });
});
