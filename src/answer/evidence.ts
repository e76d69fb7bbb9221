// Evidence features and the two small models that weigh them: a sentence ranker (which sentence
// holds the answer) and an answer/abstain decision (does the context answer the question at all).
// Both are logistic regressions (Cox 1958) over a handful of interpretable features, fitted across
// several corpora with each corpus's figures reported from the fit that did not see it
// (`sourcebound eval fit`, docs/eval-answers.md). One threshold would not generalise: a question
// can be well covered by words yet name a thing the collection never mentions, or be phrased in
// everyday words yet be answered by a sentence of the right type in the best-retrieved passage.

import { readFileSync } from 'node:fs';
import { calibrate, type IsotonicMap } from './calibration.js';
import { isLightTerm, type QuestionTerm } from './terms.js';

/** Features of a candidate sentence, in the order the ranker's weights use. */
export const SENTENCE_FEATURES = [
  // Rarity-weighted share of the question's terms the sentence holds (synonyms and corrections at partial credit).
  'coverage',
  // The same, counting terms found in its headings, its table's header row or the sentence before it.
  'contextCoverage',
  // Coverage by its headings and table header alone.
  'headingCoverage',
  // Coverage by the sentence before it alone (an answer often follows the sentence naming the topic).
  'previousCoverage',
  // The first sentence under its heading.
  'firstUnderHeading',
  // Weighted share of terms not otherwise held that a related word stands for (WordNet hypernyms, glosses).
  'relatedCoverage',
  // Coverage of the question by the sentence's whole passage (with its headings).
  'passageCoverage',
  // The question asks for a precise type of fact (a sum, a duration, a date ...) and the sentence holds one.
  'kindHeld',
  // It asks for one and the sentence holds none.
  'kindMissed',
  // A yes/no question and the sentence states a rule (may, must, not, only ...).
  'ruleHeld',
  // 1 / (1 + rank of the sentence's passage in the retrieved context).
  'sourceRank',
  // The passage's fused retrieval score over the best passage's.
  'sourceScore',
  // Cosine between question and sentence vectors (0 when none was computed).
  'cosine',
  // Share of the sentence's own content words that are question terms.
  'focus',
  // Fewer than five words.
  'short',
  // A table row or a dotted-leader line.
  'tableRow',
  // Weighted best word-vector cosine of each question term to the sentence's words (word-vectors.ts).
  'softCoverage',
] as const;
// Tried and left out, each measured held out over the four sets (docs/eval-answers.md): the
// sentence's length (PolicyQA's top-three hits up by under 0.01, and it preferred a long sentence
// about the wrong fact in a plain "how long" question); whether the sentence holds the question's
// rarest topic term, and whether it is itself a question (no set gained a question; the confidence
// calibration got worse); term proximity, the share of the question's adjacent topic-term pairs held
// within eight words (Metzler and Croft's sequential dependence model, SIGIR 2005): PolicyQA +0.013
// held out, but the demo set and fenwold each lost a question and kestrel's false abstention rose
// from 0.10 to 0.14.

/**
 * Features of a question's evidence, in the order the decision's weights use. Three, because the
 * labelled sets hold 33 unanswerable questions in all, and a logistic model needs about ten events
 * per variable to be stable (Peduzzi et al., J Clin Epidemiol 1996, a rule of thumb of the trade):
 * how well the best sentence covers the question with its context, how well anything in the
 * context does, and how much of the question names things the collection never mentions.
 * Tried and left out: whether the best sentence holds the question's rarest topic term (no held-out
 * gain), and the ranker's own probability for its best sentence (its level moved from corpus to
 * corpus: held out, a fold fitted without PolicyQA abstained on all of PolicyQA), and whether the
 * best sentence names a WordNet kin of a question term it lacks ("tram" where "rickshaw" was asked:
 * it held for 8-9 of 11 unanswerable questions on each small set, but also for a quarter of their
 * answerable ones and half of PolicyQA's, and held out it abstained on no more of them).
 */
export const QUESTION_FEATURES = ['bestContextCoverage', 'maxContextCoverage', 'unknownShare'] as const;

export interface LinearModel {
  names: readonly string[];
  weights: readonly number[];
  bias: number;
}

export interface AnswerModel {
  sentence: LinearModel;
  /** How many of the ranked sentences make the answer: the best, and others whose probability is at least closeRatio of its. */
  composition: { maxSentences: number; closeRatio: number };
  decision: LinearModel & { threshold: number };
  /** Maps the decision's probability to the share of such answers that were correct on held-out corpora. */
  calibration: IsotonicMap;
  /** Where the numbers came from. */
  provenance: string;
}

export function logistic(model: LinearModel, x: readonly number[]): number {
  let z = model.bias;
  for (let i = 0; i < model.weights.length; i++) z += (model.weights[i] ?? 0) * (x[i] ?? 0);
  return 1 / (1 + Math.exp(-z));
}

/** A question term as the decision sees it. */
export interface WeighedTerm {
  known: boolean;
  /** The collection uses a word related to it. */
  related: boolean;
  light: boolean;
  weight: number;
}

/** The question's terms as the decision sees them. */
export function weighedTerms(q: { terms: readonly QuestionTerm[]; weights: readonly number[] }): WeighedTerm[] {
  return q.terms.map((t, i) => ({ known: t.known, related: t.related.length > 0, light: isLightTerm(t), weight: q.weights[i] ?? 0 }));
}

/** The question-level features from the ranked candidates (best first) and the question's terms. */
export function questionFeatures(ranked: readonly { features: readonly number[]; p: number }[], terms: readonly WeighedTerm[]): number[] {
  const best = ranked[0];
  let topic = 0;
  let unknown = 0;
  for (const t of terms) {
    if (t.light) continue;
    topic += t.weight;
    if (!t.known) unknown += t.weight;
  }
  const ctx = SENTENCE_FEATURES.indexOf('contextCoverage');
  let maxCtx = 0;
  for (const r of ranked) maxCtx = Math.max(maxCtx, r.features[ctx] ?? 0);
  return [best?.features[ctx] ?? 0, maxCtx, topic > 0 ? unknown / topic : 0];
}

export interface Decision {
  /** Probability that the context answers the question. */
  p: number;
  answer: boolean;
  /** Calibrated probability that such an answer is correct. */
  confidence: number;
}

export function decide(model: AnswerModel, features: readonly number[]): Decision {
  const p = logistic(model.decision, features);
  return { p, answer: p >= model.decision.threshold, confidence: calibrate(p, model.calibration) };
}

/** Features as a named record, for logs and evaluation output. */
export function named(names: readonly string[], values: readonly number[]): Record<string, number> {
  const out: Record<string, number> = {};
  names.forEach((n, i) => (out[n] = Math.round((values[i] ?? 0) * 1e4) / 1e4));
  return out;
}

/** Reads a fitted model written by `sourcebound eval fit`; throws naming what is wrong. */
export function readAnswerModel(file: string): AnswerModel {
  let m: AnswerModel;
  try {
    m = JSON.parse(readFileSync(file, 'utf8')) as AnswerModel;
  } catch (err) {
    throw new Error(`answer model ${file}: ${(err as Error).message}`);
  }
  const same = (a: readonly string[] | undefined, b: readonly string[]): boolean => !!a && a.length === b.length && a.every((x, i) => x === b[i]);
  if (!m?.sentence || !same(m.sentence.names, SENTENCE_FEATURES) || m.sentence.weights?.length !== SENTENCE_FEATURES.length) {
    throw new Error(`answer model ${file}: its sentence features are not this version's (${SENTENCE_FEATURES.join(', ')})`);
  }
  if (!m.decision || !same(m.decision.names, QUESTION_FEATURES) || m.decision.weights?.length !== QUESTION_FEATURES.length || typeof m.decision.threshold !== 'number') {
    throw new Error(`answer model ${file}: its question features are not this version's (${QUESTION_FEATURES.join(', ')})`);
  }
  if (!Array.isArray(m.calibration?.knots)) throw new Error(`answer model ${file}: no calibration knots`);
  if (!(m.composition?.maxSentences >= 1) || !(m.composition.closeRatio >= 0 && m.composition.closeRatio <= 1)) throw new Error(`answer model ${file}: no answer composition`);
  return m;
}
