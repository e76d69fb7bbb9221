import { describe, expect, it } from 'vitest';
import { jaccard, mmrSelect } from '../../src/retrieve/mmr.js';

// MMR as defined by Carbonell and Goldstein (SIGIR 1998); expected orders worked by hand.
describe('maximal marginal relevance', () => {
  const sims: Record<string, number> = { 'a|b': 0.9, 'a|c': 0.1, 'b|c': 0.2 };
  const sim = (x: string, y: string): number => (x === y ? 1 : sims[[x, y].sort().join('|')] ?? 0);
  const items = [{ item: 'a', relevance: 1 }, { item: 'b', relevance: 0.9 }, { item: 'c', relevance: 0.5 }];

  it('prefers a less relevant but different passage over a near-copy of the first pick', () => {
    // Relevance scaled to [0, 1]: a 1, b 0.8, c 0. a is picked first. With λ = 0.4:
    // b = 0.4·0.8 − 0.6·0.9 = −0.22, c = 0.4·0 − 0.6·0.1 = −0.06, so c comes second.
    expect(mmrSelect(items, sim, 2, { lambda: 0.4, duplicateAt: 1.1 })).toEqual(['a', 'c']);
  });

  it('keeps the relevance order when λ = 1', () => {
    expect(mmrSelect(items, sim, 3, { lambda: 1, duplicateAt: 1.1 })).toEqual(['a', 'b', 'c']);
  });

  it('drops near-duplicates outright even when k is not reached', () => {
    expect(mmrSelect(items, sim, 3, { lambda: 1, duplicateAt: 0.85 })).toEqual(['a', 'c']);
  });

  it('computes Jaccard overlap of word sets', () => {
    expect(jaccard(new Set(['a', 'b']), new Set(['b', 'c']))).toBeCloseTo(1 / 3, 10);
  });
});
