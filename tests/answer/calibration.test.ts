import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { calibrate, fitIsotonic, fitPlatt, reliabilityTable } from '../../src/answer/calibration.js';

// An invented map for the property tests; the shipped one is fitted by `eval fit`.
const MAP = { knots: [[0.3, 0.4], [0.6, 0.7], [0.8, 0.9]] as const };

describe('calibrate', () => {
  it('is non-decreasing and stays in [0, 1] for any raw score, including out-of-range ones', () => {
    fc.assert(
      fc.property(fc.double({ min: -2, max: 3, noNaN: true }), fc.double({ min: -2, max: 3, noNaN: true }), (x, y) => {
        const [lo, hi] = x <= y ? [x, y] : [y, x];
        const a = calibrate(lo, MAP);
        const b = calibrate(hi, MAP);
        expect(a).toBeGreaterThanOrEqual(0);
        expect(b).toBeLessThanOrEqual(1);
        expect(a).toBeLessThanOrEqual(b);
      }),
    );
    expect(calibrate(Number.NaN, MAP)).toBe(0);
  });

  it('gives 0 for no evidence and the fitted block values inside the observed range', () => {
    expect(calibrate(0, MAP)).toBe(0);
    const knots = MAP.knots;
    const first = knots[0];
    const last = knots[knots.length - 1];
    expect(calibrate(first?.[0] ?? 0, MAP)).toBe(first?.[1]);
    expect(calibrate(1, MAP)).toBe(last?.[1]);
  });
});

describe('fitIsotonic', () => {
  it('pools adjacent violators into blocks whose values never decrease', () => {
    // Hand-checked: sorted labels 1,0,1,1 on Platt targets (hi = 4/5, lo = 1/3): the first two
    // pool to (0.8 + 0.333)/2 = 0.567, then 0.8 stays above it.
    const m = fitIsotonic([0.1, 0.2, 0.3, 0.4], [true, false, true, true]);
    expect(m.knots).toEqual([
      [0.1, 0.567],
      [0.3, 0.8],
    ]);
  });

  it('fits non-decreasing knots for any labelled sample', () => {
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.double({ min: 0, max: 1, noNaN: true }), fc.boolean()), { minLength: 1, maxLength: 60 }), (pts) => {
        const m = fitIsotonic(pts.map((p) => p[0]), pts.map((p) => p[1]));
        for (let i = 1; i < m.knots.length; i++) {
          expect(m.knots[i]?.[0]).toBeGreaterThan(m.knots[i - 1]?.[0] ?? Infinity);
          expect(m.knots[i]?.[1]).toBeGreaterThanOrEqual(m.knots[i - 1]?.[1] ?? Infinity);
        }
        for (const [, p] of m.knots) expect(p > 0 && p < 1).toBe(true);
      }),
    );
  });
});

describe('fitPlatt', () => {
  it('recovers the slope sign and the midpoint of a sigmoid that generated the labels', () => {
    // Labels drawn deterministically from p = 1/(1 + exp(-10(x - 0.5))): midpoint 0.5, rising.
    const xs: number[] = [];
    const ys: boolean[] = [];
    for (let i = 0; i < 400; i++) {
      const x = i / 399;
      const p = 1 / (1 + Math.exp(-10 * (x - 0.5)));
      xs.push(x);
      ys.push(((i * 7919) % 1000) / 1000 < p);
    }
    const { a, b } = fitPlatt(xs, ys);
    expect(a).toBeLessThan(-5);
    expect(-b / a).toBeGreaterThan(0.4);
    expect(-b / a).toBeLessThan(0.6);
  });
});

describe('reliabilityTable', () => {
  it('bins by confidence and reports the mean confidence and share correct of each bin', () => {
    const t = reliabilityTable([0.1, 0.15, 0.9, 0.95], [false, true, true, true], 2);
    expect(t).toEqual([
      { from: 0, to: 0.5, count: 2, meanConfidence: 0.125, shareCorrect: 0.5 },
      { from: 0.5, to: 1, count: 2, meanConfidence: 0.925, shareCorrect: 1 },
    ]);
  });
});
