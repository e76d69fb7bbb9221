// Confidence as a probability: the answer decision's raw probability (evidence.ts) mapped through
// a non-decreasing step function fitted to whether answers on held-out corpora were correct (isotonic regression by pool-adjacent-violators; Zadrozny and Elkan, "Transforming
// classifier scores into accurate multiclass probability estimates", KDD 2002), so that "0.87"
// means about 87 in 100 such answers were right on corpora the fit did not see.

import { round3 } from '../numbers.js';

/** Knots [minimum raw score of a block, share correct in it], ascending in both. */
export interface IsotonicMap {
  knots: readonly (readonly [number, number])[];
  /**
   * The largest gap, on corpora the fit did not see, between the confidence stated and the share of
   * answers that were right (over reliability bins of at least 10 answers): how far to trust it.
   */
  heldOutError?: number;
}

/**
 * Below the lowest knot there is no data (such answers abstain); there the map falls linearly
 * to 0 at a raw score of 0, an assumption from reasoning (no evidence, no confidence), not a fit.
 */
export function calibrate(score: number, c: IsotonicMap): number {
  const x = Number.isFinite(score) ? Math.min(1, Math.max(0, score)) : 0;
  const first = c.knots[0];
  if (!first) return 0;
  let p: number;
  if (x < first[0]) {
    p = first[0] > 0 ? (first[1] * x) / first[0] : first[1];
  } else {
    p = first[1];
    for (const [at, value] of c.knots) if (x >= at) p = Math.max(p, value);
  }
  return Math.round(Math.min(1, Math.max(0, p)) * 1000) / 1000;
}

/**
 * Pool-adjacent-violators over examples sorted by score, each weighing one (or its given weight,
 * e.g. so that every corpus counts alike), on Platt's smoothed targets ((N₊+1)/(N₊+2) for right,
 * 1/(N₋+2) for wrong) so that a small set cannot produce a block of exactly 0 or 1. Ties in score
 * are pooled first: they must share a value.
 */
export function fitIsotonic(scores: readonly number[], correct: readonly boolean[], weights?: readonly number[]): IsotonicMap {
  const pos = correct.filter(Boolean).length;
  const neg = correct.length - pos;
  const hi = (pos + 1) / (pos + 2);
  const lo = 1 / (neg + 2);
  const order = scores.map((_, i) => i).sort((i, j) => (scores[i] as number) - (scores[j] as number));
  const blocks: { min: number; max: number; sum: number; n: number }[] = [];
  for (const i of order) {
    const s = scores[i] as number;
    const w = weights?.[i] ?? 1;
    const y = (correct[i] ? hi : lo) * w;
    const last = blocks[blocks.length - 1];
    if (last && last.max === s) {
      last.sum += y;
      last.n += w;
    } else {
      blocks.push({ min: s, max: s, sum: y, n: w });
    }
    while (blocks.length >= 2) {
      const b = blocks[blocks.length - 1] as (typeof blocks)[number];
      const a = blocks[blocks.length - 2] as (typeof blocks)[number];
      if (a.sum / a.n < b.sum / b.n) break;
      blocks.splice(blocks.length - 2, 2, { min: a.min, max: b.max, sum: a.sum + b.sum, n: a.n + b.n });
    }
  }
  return { knots: blocks.map((b) => [b.min, round3(b.sum / b.n)] as const) };
}

/** Platt's sigmoid p = 1 / (1 + exp(a·score + b)); reported beside the isotonic fit as a check. */
export interface PlattScaling {
  a: number;
  b: number;
}

/**
 * Platt's fit with his smoothed targets, (N₊+1)/(N₊+2) and 1/(N₋+2), which keep a small
 * sample from producing 0 or 1, solved by Newton's method with a backtracking line search
 * (the algorithm of Lin, Lin and Weng, "A note on Platt's probabilistic outputs", 2007).
 */
export function fitPlatt(scores: readonly number[], correct: readonly boolean[]): PlattScaling {
  const pos = correct.filter(Boolean).length;
  const neg = correct.length - pos;
  const hi = (pos + 1) / (pos + 2);
  const lo = 1 / (neg + 2);
  const t = correct.map((c) => (c ? hi : lo));
  let a = 0;
  let b = Math.log((neg + 1) / (pos + 1));
  const loss = (A: number, B: number): number => {
    let f = 0;
    scores.forEach((s, i) => {
      const z = A * s + B;
      const ti = t[i] as number;
      // log(1 + e^z) − (1 − t)·z, written to stay finite for large |z|.
      f += z >= 0 ? ti * z + Math.log1p(Math.exp(-z)) : (ti - 1) * z + Math.log1p(Math.exp(z));
    });
    return f;
  };
  let f = loss(a, b);
  for (let iter = 0; iter < 100; iter++) {
    let h11 = 1e-12;
    let h22 = 1e-12;
    let h21 = 0;
    let g1 = 0;
    let g2 = 0;
    scores.forEach((s, i) => {
      const z = a * s + b;
      const p = z >= 0 ? Math.exp(-z) / (1 + Math.exp(-z)) : 1 / (1 + Math.exp(z));
      const q = 1 - p;
      const d2 = p * q;
      const d1 = (t[i] as number) - p;
      h11 += s * s * d2;
      h22 += d2;
      h21 += s * d2;
      g1 += s * d1;
      g2 += d1;
    });
    if (Math.abs(g1) < 1e-6 && Math.abs(g2) < 1e-6) break;
    const det = h11 * h22 - h21 * h21;
    const da = -(h22 * g1 - h21 * g2) / det;
    const db = -(-h21 * g1 + h11 * g2) / det;
    const gd = g1 * da + g2 * db;
    let step = 1;
    while (step >= 1e-10) {
      const na = a + step * da;
      const nb = b + step * db;
      const nf = loss(na, nb);
      if (nf < f + 1e-4 * step * gd) {
        a = na;
        b = nb;
        f = nf;
        break;
      }
      step /= 2;
    }
    if (step < 1e-10) break;
  }
  return { a, b };
}

/** Reliability table: answers binned by confidence, with mean confidence and share correct per bin. */
export function reliabilityTable(
  confidences: readonly number[],
  correct: readonly boolean[],
  bins = 5,
): { from: number; to: number; count: number; meanConfidence: number; shareCorrect: number }[] {
  const out = [];
  for (let k = 0; k < bins; k++) {
    const from = k / bins;
    const to = (k + 1) / bins;
    const idx = confidences.map((c, i) => i).filter((i) => {
      const c = confidences[i] as number;
      return c >= from && (k === bins - 1 ? c <= to : c < to);
    });
    const mean = (xs: number[]): number => (xs.length ? xs.reduce((s, x) => s + x, 0) / xs.length : 0);
    out.push({
      from,
      to,
      count: idx.length,
      meanConfidence: Math.round(mean(idx.map((i) => confidences[i] as number)) * 1000) / 1000,
      shareCorrect: Math.round(mean(idx.map((i) => (correct[i] ? 1 : 0))) * 1000) / 1000,
    });
  }
  return out;
}
