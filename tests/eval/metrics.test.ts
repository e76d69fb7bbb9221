import { describe, expect, it } from 'vitest';
import { averagePrecision, ndcgAt, parseQrels, recallAt, reciprocalRankAt, scoreRun } from '../../src/eval/index.js';

// Worked examples computed by hand below each assertion.

describe('nDCG (Järvelin and Kekäläinen 2002, log2 discount, linear gains as in trec_eval ndcg_cut)', () => {
  it('scores a ranking with graded gains', () => {
    const judged = new Map([['a', 3], ['b', 2], ['c', 1]]);
    // ranking b, x, a: DCG = 2/log2(2) + 0 + 3/log2(4) = 2 + 1.5 = 3.5
    // ideal a, b, c:   IDCG = 3/1 + 2/log2(3) + 1/2 = 3 + 1.261860 + 0.5 = 4.761860
    expect(ndcgAt(['b', 'x', 'a'], judged, 10)).toBeCloseTo(3.5 / (3 + 2 / Math.log2(3) + 0.5), 10);
  });

  it('is 1 for the ideal ranking and 0 with nothing relevant retrieved', () => {
    const judged = new Map([['a', 2], ['b', 1]]);
    expect(ndcgAt(['a', 'b', 'z'], judged, 10)).toBeCloseTo(1, 12);
    expect(ndcgAt(['y', 'z'], judged, 10)).toBe(0);
  });

  it('cuts both DCG and the ideal DCG at k', () => {
    const judged = new Map([['a', 1], ['b', 1], ['c', 1]]);
    // k = 2, ranking x, a: DCG = 1/log2(3); IDCG@2 = 1 + 1/log2(3)
    expect(ndcgAt(['x', 'a', 'b'], judged, 2)).toBeCloseTo(1 / Math.log2(3) / (1 + 1 / Math.log2(3)), 12);
  });
});

describe('average precision (TREC conventions: divide by all relevant documents)', () => {
  it('averages precision at each relevant rank over all relevant documents', () => {
    const judged = new Map([['a', 1], ['b', 1], ['c', 1]]);
    // relevant at ranks 1 and 3; c never retrieved: (1/1 + 2/3) / 3 = 0.555556
    expect(averagePrecision(['a', 'x', 'b'], judged)).toBeCloseTo((1 + 2 / 3) / 3, 12);
  });

  it('counts only the first 1000 ranks', () => {
    const judged = new Map([['late', 1]]);
    const ranking = [...Array.from({ length: 1000 }, (_, i) => `n${i}`), 'late'];
    expect(averagePrecision(ranking, judged, 1000)).toBe(0);
  });
});

describe('recall and reciprocal rank', () => {
  it('computes recall@k and MRR@k', () => {
    const judged = new Map([['a', 1], ['b', 1], ['c', 1], ['d', 1]]);
    const ranking = ['x', 'b', 'y', 'a'];
    expect(recallAt(ranking, judged, 2)).toBe(0.25);
    expect(recallAt(ranking, judged, 10)).toBe(0.5);
    expect(reciprocalRankAt(ranking, judged, 10)).toBe(0.5);
    expect(reciprocalRankAt(ranking, judged, 1)).toBe(0);
  });
});

describe('scoring a run', () => {
  it('means each metric over the judged queries', () => {
    const qrels = parseQrels('1 0 a 1\n1 0 b 1\n2 0 c 2\n');
    const runs = new Map([
      ['1', ['a', 'x', 'b']],
      ['2', ['y', 'c']],
    ]);
    const s = scoreRun(runs, qrels);
    expect(s.queries).toBe(2);
    // q1: AP = (1 + 2/3)/2 = 0.833333; q2: AP = 1/2 = 0.5 → MAP 0.666667
    expect(s.map).toBeCloseTo(0.6667, 4);
    // MRR: q1 1, q2 1/2 → 0.75
    expect(s['mrr@10']).toBe(0.75);
  });

  it('rejects a malformed qrels line, naming its line number', () => {
    expect(() => parseQrels('1 0 a 1\nbroken line\n', 'q.txt')).toThrow('q.txt:2');
  });
});
