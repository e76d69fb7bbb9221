import { describe, expect, it } from 'vitest';
import { reciprocalRankFusion } from '../../src/retrieve/rrf.js';

// Reciprocal rank fusion as defined by Cormack, Clarke and Buettcher, "Reciprocal Rank Fusion
// outperforms Condorcet and individual Rank Learning Methods" (SIGIR 2009):
//   RRFscore(d in D) = sum_{r in R} 1 / (k + r(d)),  k = 60.

describe('reciprocal rank fusion', () => {
  it('matches the formula of Cormack, Clarke and Buettcher on two rankings with k = 60', () => {
    const fused = reciprocalRankFusion(
      [
        { name: 'lexical', ids: [10, 20, 30] },
        { name: 'dense', ids: [30, 40, 10] },
      ],
      60,
    );
    const expected = new Map([
      [10, 1 / 61 + 1 / 63],
      [20, 1 / 62],
      [30, 1 / 63 + 1 / 61],
      [40, 1 / 62],
    ]);
    for (const f of fused) expect(f.score).toBeCloseTo(expected.get(f.id)!, 12);
    expect(fused.map((f) => f.id)).toEqual([10, 30, 20, 40]); // ties broken by id
    expect(fused[0]!.ranks).toEqual({ lexical: 1, dense: 3 });
  });

  it('weights each ranking when weights are given (weight 1 is the published formula)', () => {
    const fused = reciprocalRankFusion(
      [
        { name: 'a', ids: [1, 2], weight: 2 },
        { name: 'b', ids: [2, 1], weight: 1 },
      ],
      60,
    );
    expect(fused[0]!.id).toBe(1);
    expect(fused[0]!.score).toBeCloseTo(2 / 61 + 1 / 62, 12);
    expect(fused[1]!.score).toBeCloseTo(2 / 62 + 1 / 61, 12);
  });

  it('counts an id repeated within one ranking once, at its best rank', () => {
    const fused = reciprocalRankFusion([{ name: 'a', ids: [5, 5, 6] }], 60);
    expect(fused.find((f) => f.id === 5)!.score).toBeCloseTo(1 / 61, 12);
    expect(fused.find((f) => f.id === 6)!.score).toBeCloseTo(1 / 63, 12);
  });

  it('returns nothing for empty rankings', () => {
    expect(reciprocalRankFusion([{ name: 'a', ids: [] }], 60)).toEqual([]);
  });
});
