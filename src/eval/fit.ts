// `eval fit`: fits the answer models (sentence ranker, answer/abstain decision, confidence
// calibration) from the evidence that `eval answers --features F` records, leave-one-corpus-out.
//
// For every corpus, the models are fitted on the others and that corpus's figures are computed
// with them, so each reported figure comes from a fit that did not see its corpus. The model
// written for use is then fitted on all corpora; its calibration map comes from the held-out
// predictions. Every corpus weighs the same in every fit, however many questions it has.

import { readFileSync } from 'node:fs';
import { chooseSentences } from '../answer/extractive.js';
import {
  QUESTION_FEATURES,
  SENTENCE_FEATURES,
  decide,
  logistic,
  questionFeatures,
  type AnswerModel,
  type LinearModel,
  type WeighedTerm,
} from '../answer/evidence.js';
import { fitIsotonic, type IsotonicMap } from '../answer/calibration.js';
import { squash } from './answers.js';
import { fitConditionalLogit, fitLogistic } from './regression.js';

/** One question's record from a features file. */
export interface EvidenceRecord {
  corpus: string;
  id: string;
  kind: string;
  answerable: boolean;
  doc: string | null;
  mustContain: string[];
  mustContainAny: string[];
  explanation: {
    terms: (WeighedTerm & { label: string })[];
    ranked: { source: string; text: string; features: number[] }[];
  };
}

export function readEvidence(files: readonly string[]): EvidenceRecord[] {
  const out: EvidenceRecord[] = [];
  for (const file of files) {
    readFileSync(file, 'utf8')
      .split('\n')
      .forEach((line, i) => {
        if (!line.trim()) return;
        const r = JSON.parse(line) as EvidenceRecord;
        if (!r.explanation?.ranked || !Array.isArray(r.explanation.terms)) throw new Error(`${file}:${i + 1}: no explanation (write it with eval answers --features)`);
        for (const s of r.explanation.ranked) {
          if (s.features.length !== SENTENCE_FEATURES.length) throw new Error(`${file}:${i + 1}: sentence features from another version`);
        }
        out.push(r);
      });
  }
  return out;
}

const baseName = (p: string): string => p.split(/[\\/]/).pop() ?? p;

/** A sentence holds (one of) the expected strings and comes from the expected document. */
function holdsAnswer(r: EvidenceRecord, s: { source: string; text: string }): boolean {
  if (r.doc && baseName(s.source) !== baseName(r.doc)) return false;
  const t = squash(s.text);
  return [...r.mustContain, ...r.mustContainAny].some((m) => t.includes(squash(m)));
}

/** Whether the answer built from these ranked sentences would be scored correct. */
function answerCorrect(r: EvidenceRecord, chosen: { source: string; text: string }[]): boolean {
  const t = squash(chosen.map((c) => c.text).join(' '));
  return (
    r.mustContain.every((m) => t.includes(squash(m))) &&
    (r.mustContainAny.length === 0 || r.mustContainAny.some((m) => t.includes(squash(m)))) &&
    (!r.doc || chosen.some((c) => baseName(c.source) === baseName(r.doc ?? '')))
  );
}

const scored = (r: EvidenceRecord): boolean => r.answerable && (r.doc !== null || r.mustContain.length > 0 || r.mustContainAny.length > 0);

export interface FitOptions {
  /** Answer sentences at most (as the answerer). */
  maxSentences?: number;
  lambda?: number;
}

interface Composition {
  maxSentences: number;
  closeRatio: number;
}

// The service's target for answerable questions it abstains on.
const MAX_FALSE_ABSTENTION = 0.1;

// Candidate shares of the best sentence's probability that a further answer sentence needs (1 = the best alone).
const CLOSE_RATIOS = [1, 0.8, 0.6, 0.4, 0.2, 0];

/** The composition that answers the most questions correctly on these corpora (equal weight each); ties go to shorter answers. */
function fitComposition(records: EvidenceRecord[], ranker: LinearModel, maxSentences: number): Composition {
  const corpora = [...new Set(records.map((r) => r.corpus))];
  let best = { closeRatio: 1, score: -Infinity };
  for (const closeRatio of CLOSE_RATIOS) {
    const rows = questionRows(records, ranker, { maxSentences, closeRatio });
    let score = 0;
    for (const c of corpora) {
      const a = rows.filter((q) => q.r.corpus === c && scored(q.r));
      score += a.filter((q) => q.correctIfAnswered).length / Math.max(1, a.length);
    }
    if (score > best.score + 1e-9) best = { closeRatio, score };
  }
  return { maxSentences, closeRatio: best.closeRatio };
}

interface QuestionRow {
  r: EvidenceRecord;
  features: number[];
  correctIfAnswered: boolean;
}

/** Ranks each question's sentences with `ranker` and works out the question features and would-be correctness. */
function questionRows(records: EvidenceRecord[], ranker: LinearModel, comp: Composition): QuestionRow[] {
  return records.map((r) => {
    const ranked = r.explanation.ranked.map((s) => ({ ...s, p: logistic(ranker, s.features) })).sort((a, b) => b.p - a.p);
    const chosen = chooseSentences(ranked, comp.maxSentences, comp.closeRatio);
    return { r, features: questionFeatures(ranked, r.explanation.terms), correctIfAnswered: scored(r) && answerCorrect(r, chosen) };
  });
}

/**
 * The sentence ranker. Its weights are fitted listwise, as a conditional logit over each question's
 * candidates (McFadden 1974; the softmax ranking loss of Cao et al., ICML 2007): the likelihood that
 * the candidates holding the answer take the probability mass among that question's sentences. This
 * is the choice the answerer makes (one question, its sentences), where a pointwise fit would spend
 * its effort on telling sentences of different questions apart. A softmax is blind to a shared
 * offset and scale, so a one-feature logistic fit of the listwise score then maps it to a probability
 * that a sentence holds the answer (Platt 1999), which the composition's ratios read.
 */
function fitRanker(records: EvidenceRecord[], lambda: number): LinearModel {
  const corpora = new Set(records.map((r) => r.corpus));
  const lists: { x: number[][]; y: boolean[]; w: number }[] = [];
  for (const c of corpora) {
    const qs = records.filter((r) => r.corpus === c && scored(r) && r.explanation.ranked.some((s) => holdsAnswer(r, s)));
    for (const r of qs) {
      const y = r.explanation.ranked.map((s) => holdsAnswer(r, s));
      // A list with no wrong sentence teaches nothing about choosing.
      if (y.every(Boolean)) continue;
      // Every corpus weighs one in all, shared by its questions.
      lists.push({ x: r.explanation.ranked.map((s) => s.features), y, w: (1 / corpora.size / qs.length) * 1000 });
    }
  }
  const beta = fitConditionalLogit(SENTENCE_FEATURES.length, lists, lambda);
  const score = (f: readonly number[]): number => f.reduce((sum, v, k) => sum + v * (beta[k] ?? 0), 0);
  const x: number[][] = [];
  const y: number[] = [];
  const w: number[] = [];
  for (const l of lists) {
    l.x.forEach((f, i) => {
      x.push([score(f)]);
      y.push(l.y[i] ? 1 : 0);
      w.push(l.w / l.x.length);
    });
  }
  const platt = fitLogistic(['score'], x, y, w, 1e-6);
  const a = platt.weights[0] ?? 0;
  const round = (v: number): number => Math.round(v * 1e4) / 1e4;
  return { names: [...SENTENCE_FEATURES], bias: platt.bias, weights: beta.map((b) => round(a * b)) };
}

// The direction each decision feature may push, from what it means: more of the question covered
// never makes an answer less likely, and words the collection never uses never make it more likely.
// Without this, a small training set can learn the opposite from confounding (paraphrased questions
// are both answerable and full of words the documents do not use).
const DECISION_SIGNS: readonly (1 | -1)[] = [1, 1, -1];

/** Logistic regression whose weights keep the given signs: a weight fitted the wrong way is fixed at 0 and the rest refitted. */
function fitSigned(names: readonly string[], x: readonly number[][], y: readonly number[], w: readonly number[], lambda: number, signs: readonly (1 | -1)[]): LinearModel {
  const active = names.map((_, i) => i);
  for (;;) {
    const m = fitLogistic(
      active.map((i) => names[i] ?? ''),
      x.map((row) => active.map((i) => row[i] ?? 0)),
      y,
      w,
      lambda,
    );
    const wrong = active.filter((i, j) => (m.weights[j] ?? 0) * (signs[i] ?? 1) < 0);
    if (wrong.length === 0) {
      const weights = names.map((_, i) => (active.includes(i) ? (m.weights[active.indexOf(i)] ?? 0) : 0));
      return { names: [...names], bias: m.bias, weights };
    }
    for (const i of wrong) active.splice(active.indexOf(i), 1);
  }
}

function fitDecision(rows: QuestionRow[], lambda: number): LinearModel & { threshold: number } {
  const x: number[][] = [];
  const y: number[] = [];
  const w: number[] = [];
  const corpora = [...new Set(rows.map((q) => q.r.corpus))];
  for (const c of corpora) {
    const mine = rows.filter((q) => q.r.corpus === c && (scored(q.r) || !q.r.answerable));
    const pos = mine.filter((q) => q.r.answerable).length;
    const neg = mine.length - pos;
    for (const q of mine) {
      x.push(q.features);
      y.push(q.r.answerable ? 1 : 0);
      // Equal corpora; within a corpus with both kinds of question, equal classes.
      const share = pos > 0 && neg > 0 ? 0.5 / (q.r.answerable ? pos : neg) : 1 / mine.length;
      w.push((share / corpora.length) * 100);
    }
  }
  const model = fitSigned(QUESTION_FEATURES, x, y, w, lambda, DECISION_SIGNS);
  // The threshold: abstain on as many unanswerable questions as possible while answering at least
  // 90% of the answerable ones on every corpus (false abstention at most 0.10, the service's target);
  // a corpus past that limit costs ten times its excess.
  let best = { t: 0.5, score: -Infinity };
  for (let t = 0.05; t <= 0.951; t += 0.01) {
    let total = 0;
    for (const c of corpora) {
      const mine = rows.filter((q) => q.r.corpus === c);
      const a = mine.filter((q) => scored(q.r));
      const u = mine.filter((q) => !q.r.answerable);
      const falseAbstention = a.filter((q) => logistic(model, q.features) < t).length / Math.max(1, a.length);
      const abstained = u.filter((q) => logistic(model, q.features) < t).length / Math.max(1, u.length);
      total += (u.length > 0 ? abstained : 0) - 10 * Math.max(0, falseAbstention - MAX_FALSE_ABSTENTION);
    }
    if (total > best.score + 1e-9) best = { t: Math.round(t * 100) / 100, score: total };
  }
  return { ...model, threshold: best.t };
}

/** Held-out figures for one corpus. */
export interface CorpusFigures {
  corpus: string;
  questions: number;
  /** Correct if it never abstained: what the sentence ranker alone achieves. */
  correctIfAlwaysAnswering: number;
  correct: number;
  falseAbstention: number;
  unanswerableAbstained: number | null;
  reliability: { from: number; to: number; answers: number; meanConfidence: number; correct: number }[];
  /** The same figures had the decision's threshold been set elsewhere (the operator's `answer.minAnswerProbability`). */
  tradeOff: { threshold: number; correct: number; falseAbstention: number; unanswerableAbstained: number | null }[];
}

function figures(corpus: string, rows: QuestionRow[], model: AnswerModel): CorpusFigures {
  const a = rows.filter((q) => scored(q.r));
  const u = rows.filter((q) => !q.r.answerable);
  const decided = rows.map((q) => ({ q, d: decide(model, q.features) }));
  const answeredA = decided.filter(({ q, d }) => scored(q.r) && d.answer);
  const r3 = (v: number): number => Math.round(v * 1000) / 1000;
  const answered = decided.filter(({ q, d }) => d.answer && (scored(q.r) || !q.r.answerable));
  const bins: CorpusFigures['reliability'] = [];
  for (let b = 0; b < 5; b++) {
    const from = b / 5;
    const to = (b + 1) / 5;
    const inBin = answered.filter(({ d }) => d.confidence >= from && (d.confidence < to || (b === 4 && d.confidence <= to)));
    if (inBin.length === 0) continue;
    bins.push({
      from,
      to,
      answers: inBin.length,
      meanConfidence: r3(inBin.reduce((s, x) => s + x.d.confidence, 0) / inBin.length),
      correct: r3(inBin.filter(({ q }) => q.correctIfAnswered).length / inBin.length),
    });
  }
  const tradeOff = [0.3, 0.4, 0.5, 0.6, 0.7].map((threshold) => {
    const p = (q: QuestionRow): number => logistic(model.decision, q.features);
    return {
      threshold,
      correct: r3(a.filter((q) => q.correctIfAnswered && p(q) >= threshold).length / Math.max(1, a.length)),
      falseAbstention: r3(a.filter((q) => p(q) < threshold).length / Math.max(1, a.length)),
      unanswerableAbstained: u.length > 0 ? r3(u.filter((q) => p(q) < threshold).length / u.length) : null,
    };
  });
  return {
    corpus,
    questions: rows.length,
    tradeOff,
    correctIfAlwaysAnswering: r3(a.filter((q) => q.correctIfAnswered).length / Math.max(1, a.length)),
    correct: r3(answeredA.filter(({ q }) => q.correctIfAnswered).length / Math.max(1, a.length)),
    falseAbstention: r3((a.length - answeredA.length) / Math.max(1, a.length)),
    unanswerableAbstained: u.length > 0 ? r3(decided.filter(({ q, d }) => !q.r.answerable && !d.answer).length / u.length) : null,
    reliability: bins,
  };
}

/** Calibration from held-out predictions: each corpus weighs the same. */
function fitCalibration(points: { corpus: string; p: number; correct: boolean }[]): IsotonicMap {
  const counts = new Map<string, number>();
  for (const x of points) counts.set(x.corpus, (counts.get(x.corpus) ?? 0) + 1);
  const k = counts.size || 1;
  return fitIsotonic(
    points.map((x) => x.p),
    points.map((x) => x.correct),
    points.map((x) => 100 / k / (counts.get(x.corpus) ?? 1)),
  );
}

// Reliability bins with fewer answers than this say more about chance than about calibration.
const MIN_BIN_ANSWERS = 10;

/** The largest held-out gap between stated confidence and share correct, rounded up to 0.05. */
function heldOutError(figs: readonly CorpusFigures[]): number {
  let worst = 0;
  for (const f of figs) for (const b of f.reliability) if (b.answers >= MIN_BIN_ANSWERS) worst = Math.max(worst, Math.abs(b.meanConfidence - b.correct));
  return Math.min(1, Math.ceil(worst * 20 - 1e-9) / 20);
}

export interface FitResult {
  model: AnswerModel;
  /** Per corpus: the models fitted without it, and its figures under them. */
  heldOut: { corpus: string; model: AnswerModel; figures: CorpusFigures }[];
}

export function fitAnswerModels(records: EvidenceRecord[], opts: FitOptions = {}): FitResult {
  const lambda = opts.lambda ?? 1;
  const corpora = [...new Set(records.map((r) => r.corpus))].sort();
  if (corpora.length < 2) throw new Error('fitting leave-one-corpus-out needs evidence from at least two corpora');
  // First pass: ranker and decision per fold, and each corpus's held-out decision probabilities.
  const maxSentences = opts.maxSentences ?? 3;
  const folds = corpora.map((held) => {
    const train = records.filter((r) => r.corpus !== held);
    const ranker = fitRanker(train, lambda);
    const composition = fitComposition(train, ranker, maxSentences);
    const decision = fitDecision(questionRows(train, ranker, composition), lambda);
    const rows = questionRows(
      records.filter((r) => r.corpus === held),
      ranker,
      composition,
    );
    const points = rows
      .filter((q) => logistic(decision, q.features) >= decision.threshold && (scored(q.r) || !q.r.answerable))
      .map((q) => ({ corpus: held, p: logistic(decision, q.features), correct: q.correctIfAnswered }));
    return { held, ranker, composition, decision, rows, points };
  });
  const stamp = `fitted leave-one-corpus-out on ${corpora.join(', ')}`;
  // Second pass: each fold's calibration comes from the other folds' held-out predictions.
  const heldOut = folds.map((f) => {
    const calibration = fitCalibration(folds.filter((g) => g.held !== f.held).flatMap((g) => g.points));
    const model: AnswerModel = { provenance: `${stamp}; this model without ${f.held}`, composition: f.composition, sentence: f.ranker, decision: f.decision, calibration };
    return { corpus: f.held, model, figures: figures(f.held, f.rows, model) };
  });
  const ranker = fitRanker(records, lambda);
  const composition = fitComposition(records, ranker, maxSentences);
  const decision = fitDecision(questionRows(records, ranker, composition), lambda);
  const calibration: IsotonicMap = { ...fitCalibration(folds.flatMap((f) => f.points)), heldOutError: heldOutError(heldOut.map((h) => h.figures)) };
  return {
    model: { provenance: `${stamp}; this model on all of them, calibrated on held-out predictions`, composition, sentence: ranker, decision, calibration },
    heldOut,
  };
}

/** The TypeScript module that ships a fitted model with the service. */
export function modelModule(model: AnswerModel, command: string): string {
  return `// The answer models' numbers. Written by \`${command}\`
// (docs/eval-answers.md); do not edit by hand.
import type { AnswerModel } from './evidence.js';

export const FITTED_MODEL: AnswerModel = ${JSON.stringify(model, null, 2)};
`;
}
