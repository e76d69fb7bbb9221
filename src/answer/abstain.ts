// When to say "the documents don't answer this", and how sure we are when we do answer.
// One pure decision function with its thresholds as parameters, so a labelled question set
// can tune them later without touching the flow in answerer.ts.

import { isJunkSentence, splitSentences } from './sentences.js';
import type { ContextSource } from './types.js';
import { contentStems } from './words.js';

export const ABSTAIN_TEXT = 'The available documents do not answer this question.';

export interface AbstainThresholds {
  /** Rarity-weighted share of the question's content words the best sentence must cover. */
  minLexicalCoverage: number;
  /** Dense cosine at or above which retrieval alone counts as evidence. */
  minDenseScore: number;
}

/**
 * Defaults chosen by reasoning, not yet measured (a labelled set will tune them):
 * - coverage 0.4: with rarity weights, the best sentence must hold well over a third of what
 *   the question is about; one common word out of three rare ones stays below it.
 * - dense 0.5: for sentence-embedding models, unrelated text sits near 0–0.2 and paraphrases
 *   usually above 0.5, so only a clear semantic match can rescue low word overlap. The hashing
 *   fallback rarely reaches 0.5, leaving the decision to word coverage, which is what we want
 *   when no semantic model is loaded.
 * - support 0.5: a claim must share at least half its content words with its cited sources.
 */
export const DEFAULT_THRESHOLDS: AbstainThresholds & { minSupport: number } = {
  minLexicalCoverage: 0.4,
  minDenseScore: 0.5,
  minSupport: 0.5,
};

const SINGLE_SIGNAL_CEILING = 0.85;

export interface Evidence {
  hitCount: number;
  /** Rarity-weighted coverage of the question by the best sentence, 0..1. */
  coverage: number;
  /** Best dense cosine among the hits, or null when the dense leg saw none. */
  denseScore: number | null;
  /** Generative mode only: the model replied with the abstention sentence. */
  modelAbstained?: boolean;
  /** Generative mode only: number of answer sentences that passed the grounding check. */
  supportedClaims?: number;
}

export type AbstainReason = 'no_hits' | 'weak_evidence' | 'model_abstained' | 'unsupported_answer';

/** The evidence test both modes use. Returns the first reason to abstain, or null to answer. */
export function abstainReason(e: Evidence, t: AbstainThresholds): AbstainReason | null {
  if (e.hitCount === 0) return 'no_hits';
  const denseWeak = e.denseScore === null || e.denseScore < t.minDenseScore;
  if (e.coverage < t.minLexicalCoverage && denseWeak) return 'weak_evidence';
  if (e.modelAbstained) return 'model_abstained';
  if (e.supportedClaims !== undefined && e.supportedClaims === 0) return 'unsupported_answer';
  return null;
}

/**
 * Confidence in [0,1], non-decreasing in each input. Word coverage and dense similarity are
 * combined as a noisy-or, 1 − (1 − 0.85·coverage)(1 − 0.85·dense⁺): either strong signal
 * raises it, but one signal alone tops out at 0.85, since full word overlap can still be a
 * sentence that merely mentions the topic. The result is scaled by the share of answer
 * sentences that passed the grounding check (1 for extractive answers, which are verbatim).
 * This is the raw evidence score (`evidence` in the reply); calibration.ts maps it to the
 * probability reported as `confidence`.
 */
export function confidence(input: { coverage: number; denseScore: number | null; supportedShare: number }): number {
  const c = SINGLE_SIGNAL_CEILING * clamp01(input.coverage);
  const d = input.denseScore === null ? 0 : SINGLE_SIGNAL_CEILING * clamp01(input.denseScore);
  const base = 1 - (1 - c) * (1 - d);
  return Math.round(clamp01(base * clamp01(input.supportedShare)) * 1000) / 1000;
}

/** True when a model reply is (essentially) the abstention sentence and cites nothing. */
export function isAbstentionReply(reply: string): boolean {
  if (/\[\d+\]/.test(reply)) return false;
  const r = normalise(reply);
  const a = normalise(ABSTAIN_TEXT);
  return r.length > 0 && r.includes(a) && r.length <= a.length * 2;
}

/**
 * Lucene-style BM25 idf, ln(1 + (N − df + 0.5)/(df + 0.5)), over the candidate sentences:
 * a question word found in no candidate gets the largest weight, one found everywhere ~0.
 */
export function rarityWeights(questionStems: Iterable<string>, candidates: ReadonlyArray<ReadonlySet<string>>): Map<string, number> {
  const n = candidates.length;
  const weights = new Map<string, number>();
  for (const q of questionStems) {
    let df = 0;
    for (const c of candidates) if (c.has(q)) df++;
    weights.set(q, Math.log(1 + (n - df + 0.5) / (df + 0.5)));
  }
  return weights;
}

/** Weighted share of the question's stems present in `stems`. */
export function weightedCoverage(weights: ReadonlyMap<string, number>, stems: ReadonlySet<string>): number {
  let total = 0;
  let hit = 0;
  for (const [w, weight] of weights) {
    total += weight;
    if (stems.has(w)) hit += weight;
  }
  return total > 0 ? hit / total : 0;
}

/** Coverage of the question by the best single sentence across all sources (lexical only). */
export function bestSentenceCoverage(question: string, sources: ContextSource[]): number {
  const q = contentStems(question);
  if (q.size === 0) return 0;
  const cands: Set<string>[] = [];
  for (const s of sources) {
    const headings = headingSet(s);
    for (const sent of splitSentences(s.text)) {
      if (!isJunkSentence(sent.text, headings)) cands.push(contentStems(sent.text));
    }
  }
  const weights = rarityWeights(q, cands);
  let best = 0;
  for (const c of cands) best = Math.max(best, weightedCoverage(weights, c));
  return best;
}

/** Lower-cased heading names of a source's parts, used to skip heading-only lines. */
export function headingSet(s: ContextSource): Set<string> {
  const out = new Set<string>();
  for (const p of s.parts) for (const h of p.section.split(' > ')) if (h.trim()) out.add(h.trim().toLowerCase());
  for (const h of s.section.split(' > ')) if (h.trim()) out.add(h.trim().toLowerCase());
  return out;
}

function normalise(s: string): string {
  return s
    .toLowerCase()
    .replace(/[’']/g, '')
    .replace(/[^\p{L}\p{N}]+/gu, ' ')
    .trim();
}

function clamp01(x: number): number {
  return Number.isFinite(x) ? Math.min(1, Math.max(0, x)) : 0;
}
