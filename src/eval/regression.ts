// The regressions the answer models are fitted with: logistic regression and the conditional
// logit, both L2-regularised and solved by Newton's method (the problems are small: tens of weights).

import type { LinearModel } from '../answer/evidence.js';

/**
 * L2-regularised logistic regression by Newton's method (iteratively reweighted least squares),
 * with a weight per example; the bias is not penalised.
 */
export function fitLogistic(names: readonly string[], x: readonly number[][], y: readonly number[], w: readonly number[], lambda = 1): LinearModel {
  const d = names.length + 1;
  const beta = new Array<number>(d).fill(0);
  const row = (i: number): number[] => [1, ...(x[i] ?? [])];
  for (let iter = 0; iter < 100; iter++) {
    const g = new Array<number>(d).fill(0);
    const h = Array.from({ length: d }, () => new Array<number>(d).fill(0));
    for (let i = 0; i < x.length; i++) {
      const xi = row(i);
      let z = 0;
      for (let j = 0; j < d; j++) z += (beta[j] ?? 0) * (xi[j] ?? 0);
      const p = 1 / (1 + Math.exp(-z));
      const wi = w[i] ?? 1;
      const r = (y[i] ?? 0) - p;
      const v = p * (1 - p) * wi;
      for (let j = 0; j < d; j++) {
        g[j]! += wi * r * (xi[j] ?? 0);
        for (let k = 0; k < d; k++) h[j]![k]! += v * (xi[j] ?? 0) * (xi[k] ?? 0);
      }
    }
    h[0]![0]! += 1e-9;
    // The bias (index 0) is not penalised.
    if (newtonStep(beta, g, h, lambda, 1) < 1e-7) break;
  }
  const round = (v: number): number => Math.round(v * 1e4) / 1e4;
  return { names: [...names], bias: round(beta[0] ?? 0), weights: beta.slice(1).map(round) };
}

/**
 * L2-regularised conditional logit by Newton's method: each list's candidates compete in a softmax
 * and the objective is the log of the probability its positive candidates take together.
 */
export function fitConditionalLogit(d: number, lists: readonly { x: readonly (readonly number[])[]; y: readonly boolean[]; w: number }[], lambda: number): number[] {
  const beta = new Array<number>(d).fill(0);
  for (let iter = 0; iter < 300; iter++) {
    const g = new Array<number>(d).fill(0);
    const h = Array.from({ length: d }, () => new Array<number>(d).fill(0));
    for (const l of lists) {
      const z = l.x.map((f) => f.reduce((sum, v, k) => sum + v * (beta[k] ?? 0), 0));
      const top = Math.max(...z);
      const e = z.map((v) => Math.exp(v - top));
      // Moments of the features under the softmax over all candidates (p) and over the positives (q).
      const moments = (keep: (i: number) => boolean, withSecond: boolean): { mean: number[]; second: number[][] } => {
        let total = 0;
        const mean = new Array<number>(d).fill(0);
        const second = Array.from({ length: d }, () => new Array<number>(d).fill(0));
        l.x.forEach((f, i) => {
          if (!keep(i)) return;
          total += e[i]!;
          for (let j = 0; j < d; j++) {
            mean[j]! += e[i]! * (f[j] ?? 0);
            if (withSecond) for (let k = 0; k < d; k++) second[j]![k]! += e[i]! * (f[j] ?? 0) * (f[k] ?? 0);
          }
        });
        for (let j = 0; j < d; j++) {
          mean[j]! /= total;
          for (let k = 0; k < d; k++) second[j]![k]! /= total;
        }
        return { mean, second };
      };
      const all = moments(() => true, true);
      const pos = moments((i) => l.y[i] === true, false);
      for (let j = 0; j < d; j++) {
        g[j]! += l.w * (pos.mean[j]! - all.mean[j]!);
        for (let k = 0; k < d; k++) {
          // The negative log-likelihood's Hessian is Cov_p(x) − Cov_q(x); with several positives that
          // need not be positive definite, so the step uses Cov_p(x) alone, which bounds it from above
          // and keeps every step a descent (a bound-optimisation step, after Böhning and Lindsay 1988).
          h[j]![k]! += l.w * (all.second[j]![k]! - all.mean[j]! * all.mean[k]!);
        }
      }
    }
    if (newtonStep(beta, g, h, lambda, 0) < 1e-7) break;
  }
  return beta;
}

/**
 * One regularised Newton step in place: adds the L2 penalty from index `from` on to the gradient `g`
 * (of the log-likelihood) and the curvature `h`, solves, moves `beta`; returns the largest change.
 */
function newtonStep(beta: number[], g: number[], h: number[][], lambda: number, from: number): number {
  for (let j = from; j < beta.length; j++) {
    g[j]! -= lambda * (beta[j] ?? 0);
    h[j]![j]! += lambda;
  }
  const step = solve(h, g);
  let size = 0;
  for (let j = 0; j < beta.length; j++) {
    beta[j]! += step[j] ?? 0;
    size = Math.max(size, Math.abs(step[j] ?? 0));
  }
  return size;
}

/** Solves A·x = b by Gaussian elimination with partial pivoting (A is small and positive definite). */
function solve(a: number[][], b: number[]): number[] {
  const n = b.length;
  const m = a.map((r, i) => [...r, b[i] ?? 0]);
  for (let c = 0; c < n; c++) {
    let piv = c;
    for (let r = c + 1; r < n; r++) if (Math.abs(m[r]![c]!) > Math.abs(m[piv]![c]!)) piv = r;
    [m[c], m[piv]] = [m[piv]!, m[c]!];
    const div = m[c]![c]! || 1e-12;
    for (let r = 0; r < n; r++) {
      if (r === c) continue;
      const f = m[r]![c]! / div;
      for (let k = c; k <= n; k++) m[r]![k]! -= f * m[c]![k]!;
    }
  }
  return m.map((r, i) => (r[n] ?? 0) / (r[i] || 1e-12));
}
