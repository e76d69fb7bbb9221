// Pseudo-relevance feedback with RM3 (Lavrenko and Croft, "Relevance-Based Language Models", SIGIR 2001;
// the RM3 interpolation as in Abdul-Jaleel et al., UMass at TREC 2004):
//   P(t|R) ∝ sum over feedback docs d of  P(t|d) * P(d|q),   P(t|d) = tf(t, d) / |d|
//   w(t)    = λ * P(t|q) + (1 − λ) * P(t|R)    over the top `terms` feedback terms
// P(d|q) comes from the first-pass scores, normalised to sum to 1 over the feedback documents.

import { STOP_WORDS, queryTerms, type WeightedTerm } from './query-text.js';

export interface Rm3Options {
  /** Feedback documents taken from the top of the first pass. */
  docs: number;
  /** Expansion terms kept from the relevance model. */
  terms: number;
  /** λ, the weight of the original query. */
  originalWeight: number;
}

// 10 documents, 15 terms, λ = 0.5: the setting in DESIGN.md's reference run; confirmed on CISI by a sweep
// (docs/benchmarks.md).
export const DEFAULT_RM3: Rm3Options = { docs: 10, terms: 15, originalWeight: 0.5 };

/** Words worth adding to a query: letters present, not a stop word, not a lone letter. */
function feedbackTerms(text: string): string[] {
  return queryTerms(text).filter((t) => t.length > 1 && /\p{L}/u.test(t) && !STOP_WORDS.has(t));
}

/**
 * The RM3 query: original terms (weighted by their query frequency) interpolated with the relevance model
 * built from `feedback` (texts with first-pass scores, best first). Heaviest terms first.
 */
export function rm3Expand(
  original: ReadonlyMap<string, number>,
  feedback: readonly { text: string; score: number }[],
  opts: Rm3Options = DEFAULT_RM3,
): WeightedTerm[] {
  const qLen = [...original.values()].reduce((s, n) => s + n, 0);
  const weights = new Map<string, number>();
  if (qLen > 0) for (const [t, n] of original) weights.set(t, opts.originalWeight * (n / qLen));
  const docs = feedback.slice(0, opts.docs);
  // Scores may be of any scale (BM25, RRF); shift so the lowest is still positive before normalising.
  const min = Math.min(...docs.map((d) => d.score));
  const shifted = docs.map((d) => d.score - Math.min(0, min) + 1e-9);
  const total = shifted.reduce((s, x) => s + x, 0);
  if (docs.length === 0 || total <= 0 || opts.originalWeight >= 1) return toList(weights);
  const relevance = new Map<string, number>();
  docs.forEach((d, i) => {
    const terms = feedbackTerms(d.text);
    if (terms.length === 0) return;
    const pd = shifted[i]! / total;
    const tf = new Map<string, number>();
    for (const t of terms) tf.set(t, (tf.get(t) ?? 0) + 1);
    for (const [t, n] of tf) relevance.set(t, (relevance.get(t) ?? 0) + (n / terms.length) * pd);
  });
  const top = [...relevance].sort((a, b) => b[1] - a[1] || (a[0] < b[0] ? -1 : 1)).slice(0, opts.terms);
  const mass = top.reduce((s, [, p]) => s + p, 0);
  if (mass > 0) for (const [t, p] of top) weights.set(t, (weights.get(t) ?? 0) + (1 - opts.originalWeight) * (p / mass));
  return toList(weights);
}

function toList(weights: Map<string, number>): WeightedTerm[] {
  return [...weights].map(([term, weight]) => ({ term, weight })).sort((a, b) => b.weight - a.weight || (a.term < b.term ? -1 : 1));
}
