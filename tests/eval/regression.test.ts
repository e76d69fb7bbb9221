import { describe, expect, it } from 'vitest';
import { fitConditionalLogit, fitLogistic } from '../../src/eval/regression.js';
import { mulberry32 } from '../fixtures/random.js';

describe('fitConditionalLogit', () => {
  // With two candidates a list, the conditional logit is logistic regression on the difference of
  // their features without an intercept (the Bradley–Terry model; McFadden 1974). The same pairs
  // entered both ways round make a logistic fit's intercept zero, so the two fits must agree.
  it('equals logistic regression on feature differences when every list holds two candidates', () => {
    const rand = mulberry32(7);
    const truth = [1.5, -2, 0.5];
    const lists: { x: number[][]; y: boolean[]; w: number }[] = [];
    const dx: number[][] = [];
    const dy: number[] = [];
    const dw: number[] = [];
    for (let i = 0; i < 400; i++) {
      const a = truth.map(() => rand());
      const b = truth.map(() => rand());
      const za = a.reduce((s, v, k) => s + v * truth[k]!, 0);
      const zb = b.reduce((s, v, k) => s + v * truth[k]!, 0);
      const aWins = rand() < 1 / (1 + Math.exp(zb - za));
      lists.push({ x: [a, b], y: [aWins, !aWins], w: 1 });
      const d = a.map((v, k) => v - b[k]!);
      dx.push(d, d.map((v) => -v));
      dy.push(aWins ? 1 : 0, aWins ? 0 : 1);
      dw.push(0.5, 0.5);
    }
    const cl = fitConditionalLogit(3, lists, 1);
    const lr = fitLogistic(['a', 'b', 'c'], dx, dy, dw, 1);
    expect(Math.abs(lr.bias)).toBeLessThan(1e-3);
    cl.forEach((v, k) => expect(v).toBeCloseTo(lr.weights[k]!, 3));
    // And the fit recovers the direction of the weights that generated the choices.
    expect(Math.sign(cl[0]!)).toBe(1);
    expect(Math.sign(cl[1]!)).toBe(-1);
  });

  it('credits a list with several right candidates as a whole (their probabilities add up)', () => {
    // Feature 0 marks the right sentences; two of them in each list of four.
    const lists = Array.from({ length: 20 }, () => ({ x: [[1], [1], [0], [0]], y: [true, true, false, false], w: 1 }));
    const [w] = fitConditionalLogit(1, lists, 0.1);
    expect(w).toBeGreaterThan(3);
  });
});
