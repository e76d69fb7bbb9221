// The offline answer: the sentences of the context that best answer the question, quoted
// verbatim with their citations. Used when no completion endpoint is configured or it fails.

import type { Embedder } from '../embed/types.js';
import type { Citation } from '../types.js';
import { headingSet } from './abstain.js';
import { answerCue, cueBonus, missesKind, type AnswerKind } from './cues.js';
import { citationFor, coveredByParts } from './cite.js';
import { isPlantedInstruction } from './planted.js';
import { isJunkSentence, splitSentences, type SentenceSpan } from './sentences.js';
import { isLightTerm, questionTerms, termIn, type QuestionTerm } from './synonyms.js';
import type { ContextSource } from './types.js';
import { contentStems, tokenize } from './words.js';

export interface ExtractOptions {
  embedder?: Embedder;
  /** At most this many answer sentences (default 3). */
  maxSentences?: number;
  /** A further sentence is used only if its score is at least this share of the best (default 0.85). */
  closeRatio?: number;
  /** Credit for a question term found only in a sentence's headings or table header, 0..1 (default 0.5). */
  contextCredit?: number;
  /** Share of support lost when the question asks for a duration, amount, time, age, count or measure and the best sentence holds none (default 0.25). */
  kindMissPenalty?: number;
  /** Labels of question terms known to be common in the collection at large (see `absentTerms`). */
  commonTerms?: ReadonlySet<string>;
}

export interface ExtractResult {
  answer: string;
  citations: Citation[];
  /**
   * Rarity-weighted share of the question's terms that the best sentence covers, counting a
   * term found only in its headings or table header at `contextCredit`, 0..1.
   */
  support: number;
  /** Cosine between the question and the best sentence, when an embedder was given. */
  cosine: number | null;
  /** Question terms the best sentence (with its headings) does not hold, with their rarity weight. */
  uncovered: { term: string; weight: number }[];
  /** Topic terms of the question that no candidate sentence or heading holds. */
  absent: string[];
}

interface Candidate {
  sourceIndex: number;
  span: SentenceSpan;
  /** The raw sentence just before this one in its source, when it is prose. */
  prev: SentenceSpan | null;
  stems: Set<string>;
  /** Stems of the headings above the sentence and, for a table row, of the header row. */
  context: Set<string>;
  /** Numeric ranges the sentence states ("30 to 59 minutes", "66 or over"). */
  ranges: [number, number][];
  coverage: number;
  score: number;
  cosine: number | null;
}

// Sentences opening with these lean on the sentence before them for their meaning.
const LEANS_BACK =
  /^(?:this|that|these|those|it|its|they|their|them|such|however|but|also|otherwise|therefore|thus|instead|in (?:this|that|such) case|as a result|in addition|then)\b/i;

const DEFAULT_KIND_MISS_PENALTY = 0.25;

/** The idf a term gets when no candidate holds it (df = 0). */
function absentWeight(n: number): number {
  return Math.log(1 + (n + 0.5) / 0.5) - 1e-9;
}

/** A sentence's coverage, reduced when it lacks the precise kind of fact the question asks for. */
function evidence(c: Candidate, cue: AnswerKind | null, penalty: number): number {
  return missesKind(cue, c.span.text) ? c.coverage * (1 - penalty) : c.coverage;
}

// A small lift for sentences from better-retrieved sources, enough to decide near-ties.
const RANK_BONUS = 0.03;

// Embedding every sentence is the costly step; beyond this many we keep the lexically best.
const MAX_EMBEDDED = 200;

export async function extractAnswer(
  question: string,
  sources: ContextSource[],
  opts: ExtractOptions = {},
): Promise<ExtractResult> {
  const maxSentences = Math.max(1, opts.maxSentences ?? 3);
  const closeRatio = opts.closeRatio ?? 0.85;
  const cands = candidates(sources);
  const none: ExtractResult = { answer: '', citations: [], support: 0, cosine: null, uncovered: [], absent: [] };
  if (cands.length === 0) return none;

  const contextCredit = opts.contextCredit ?? 0.5;
  const cue = answerCue(question);
  let terms = questionTerms(question);
  if (terms.length === 0) terms = tokenize(question).map((t) => ({ label: t.word, alts: [[t.stem]] }));
  const weights = termWeights(terms, cands, opts.commonTerms);
  const q = new Set(terms.flatMap((t) => t.alts.flat()));
  for (const c of cands) {
    // Coverage decides; among sentences covering the question equally, prefer the focused one
    // (more of its own words are question words), one holding the kind of fact asked for, and
    // then the better-retrieved source.
    let shared = 0;
    for (const w of c.stems) if (q.has(w)) shared++;
    const focus = c.stems.size > 0 ? shared / c.stems.size : 0;
    c.coverage = termCoverage(terms, weights, c, contextCredit);
    c.score = c.coverage + 0.1 * focus + RANK_BONUS / (c.sourceIndex + 1) + cueBonus(cue, c.span.text);
  }
  if (opts.embedder) await addCosine(question, cands, opts.embedder);

  const ranked = [...cands].sort((a, b) => b.score - a.score);
  const best = ranked[0];
  if (!best || (best.coverage <= 0 && (best.cosine ?? 0) <= 0)) return none;

  const chosen: Candidate[] = [best];
  const seen = new Set([best.span.text]);
  for (const c of ranked.slice(1)) {
    if (chosen.length >= maxSentences || c.score < closeRatio * best.score) break;
    if (seen.has(c.span.text)) continue;
    seen.add(c.span.text);
    chosen.push(c);
  }

  const pieces = toPieces(chosen, sources);
  const sourceOrder: number[] = [];
  for (const c of chosen) if (!sourceOrder.includes(c.sourceIndex)) sourceOrder.push(c.sourceIndex);

  const parts: string[] = [];
  const citations: Citation[] = [];
  // Every quoted passage gets its own number, even beside another from the same source: a number
  // names one passage, so the reader's [2] opens the words it follows.
  sourceOrder.forEach((si) => {
    const source = sources[si];
    if (!source) return;
    for (const p of pieces.filter((x) => x.sourceIndex === si)) {
      const cite = citationFor(source, p.start, p.end, citations.length + 1);
      citations.push(cite);
      parts.push(`${display(cite.quote)} [${cite.n}]`);
    }
  });

  return {
    answer: parts.join(' '),
    citations,
    support: missesKind(cue, parts.join(' ')) ? best.coverage * (1 - (opts.kindMissPenalty ?? DEFAULT_KIND_MISS_PENALTY)) : best.coverage,
    absent: terms.filter((t, i) => !isLightTerm(t) && (weights[i] ?? 0) >= absentWeight(cands.length)).map((t) => t.label),
    uncovered: terms
      .map((t, i) => ({ term: t.label, weight: Math.round((weights[i] ?? 0) * 100) / 100, held: holds(t, best) || termIn(t, best.context) }))
      .filter((t) => !t.held)
      .map(({ term, weight }) => ({ term, weight })),
    cosine: best.cosine,
  };
}

/** The answer shows table rows and list items as plain text; the citation keeps the exact quote. */
export function display(quote: string): string {
  return quote
    .split('\n')
    .map((line) => {
      const l = line.trim().replace(/^(?:[-*•]|\d+[.)])\s+/, '');
      return /^\|.*\|$/.test(l) ? l.slice(1, -1).split('|').map((c) => c.trim()).join(' | ') : l;
    })
    .filter(Boolean)
    .join(' ');
}

/** Every quotable sentence of the context; planted instructions are never quotable. */
export function candidates(sources: ContextSource[]): Candidate[] {
  const out: Candidate[] = [];
  sources.forEach((source, sourceIndex) => {
    const headings = headingSet(source);
    const spans = splitSentences(source.text);
    let prev: SentenceSpan | null = null;
    for (const span of spans) {
      if (isJunkSentence(span.text, headings) || isPlantedInstruction(span.text)) {
        prev = null;
        continue;
      }
      const context = contentStems(`${sectionAt(source, span.start)} ${tableHeader(source.text, span)}`);
      const ranges = numericRanges(span.text);
      out.push({ sourceIndex, span, prev, stems: contentStems(span.text), context, ranges, coverage: 0, score: 0, cosine: null });
      prev = span;
    }
  });
  return out;
}

/**
 * BM25-style idf of each term over the candidate sentences (with their headings), as in
 * Lucene: ln(1 + (N − df + 0.5)/(df + 0.5)). A term no candidate holds weighs most.
 */
function termWeights(terms: QuestionTerm[], cands: Candidate[], common: ReadonlySet<string> = new Set()): number[] {
  const n = cands.length;
  return terms.map((t) => {
    let df = 0;
    for (const c of cands) if (holds(t, c) || termIn(t, c.context)) df++;
    // Missing from these candidates but common in the collection: retrieval simply did not
    // bring its passages, so weigh it as a term found in half the candidates (idf = ln 2).
    if (df === 0 && common.has(t.label)) return Math.LN2;
    const idf = Math.log(1 + (n - df + 0.5) / (df + 0.5));
    // When every candidate is on the question's topic, local idf would call the topic words
    // worthless; a floor of ln 2 (the idf of a term in half the candidates) keeps them counting.
    return isLightTerm(t) ? LIGHT_SHARE * Math.min(idf, Math.LN2) : Math.max(idf, Math.LN2);
  });
}

// Framing words ("make", "bring", "first") keep a little weight: enough to break ties, too
// little for their absence to sink an otherwise covered question.
const LIGHT_SHARE = 0.5;

function termCoverage(terms: QuestionTerm[], weights: number[], c: Candidate, contextCredit: number): number {
  let total = 0;
  let hit = 0;
  terms.forEach((t, i) => {
    const w = weights[i] ?? 0;
    total += w;
    if (holds(t, c)) hit += w;
    else if (termIn(t, c.context)) hit += contextCredit * w;
  });
  return total > 0 ? hit / total : 0;
}

/** The sentence holds the term, or, for a bare number, states a range that contains it. */
function holds(t: QuestionTerm, c: Candidate): boolean {
  if (termIn(t, c.stems)) return true;
  const only = t.alts.length === 1 && t.alts[0]?.length === 1 ? t.alts[0][0] : undefined;
  if (only === undefined || !/^\d+(?:\.\d+)?$/.test(only)) return false;
  const x = Number(only);
  return c.ranges.some(([lo, hi]) => x >= lo && x <= hi);
}

/** "30 to 59", "15–29", "60 minutes or more", "66 or over" as inclusive ranges. */
export function numericRanges(text: string): [number, number][] {
  const out: [number, number][] = [];
  for (const m of text.matchAll(/(\d+(?:\.\d+)?)\s*(?:to|–|-)\s*(\d+(?:\.\d+)?)(?![:.]\d)/g)) {
    const lo = Number(m[1]);
    const hi = Number(m[2]);
    if (lo < hi) out.push([lo, hi]);
  }
  for (const m of text.matchAll(/(\d+(?:\.\d+)?)\s+(?:[a-z]+\s+)?or\s+(?:more|over|above|older|longer)\b/gi)) out.push([Number(m[1]), Infinity]);
  return out;
}

/** The heading path of the chunk holding offset `at` of the source text. */
function sectionAt(source: ContextSource, at: number): string {
  const abs = source.start + at;
  const part = source.parts.find((p) => abs >= p.start && abs < p.end);
  return part?.section ?? source.section;
}

/** For a table row, the first row of its table (the header), else "". */
function tableHeader(text: string, span: SentenceSpan): string {
  if (!span.text.includes('|')) return '';
  let lineStart = text.lastIndexOf('\n', span.start - 1) + 1;
  let header = '';
  while (lineStart > 0) {
    const prevStart = text.lastIndexOf('\n', lineStart - 2) + 1;
    const line = text.slice(prevStart, lineStart - 1);
    if (!line.includes('|')) break;
    header = line;
    lineStart = prevStart;
  }
  return header;
}

async function addCosine(question: string, cands: Candidate[], embedder: Embedder): Promise<void> {
  const pool = [...cands].sort((a, b) => b.score - a.score).slice(0, MAX_EMBEDDED);
  const vectors = await embedder.embed([question, ...pool.map((c) => c.span.text)]);
  const qv = vectors[0];
  if (!qv) return;
  // A learned model's cosine is a meaning signal worth as much as word overlap; the hashing
  // fallback mostly re-measures word overlap, so it gets less say.
  const alpha = embedder.semantic ? 0.5 : 0.3;
  pool.forEach((c, i) => {
    const v = vectors[i + 1];
    if (!v) return;
    const cos = dot(qv, v);
    c.cosine = cos;
    c.score = (1 - alpha) * c.score + alpha * Math.max(0, cos);
  });
}

interface Piece {
  sourceIndex: number;
  start: number;
  end: number;
}

/** Chosen sentences (plus a leading context sentence where needed) as merged spans, in document order per source. */
function toPieces(chosen: Candidate[], sources: ContextSource[]): Piece[] {
  const raw: Piece[] = chosen.map((c) => {
    let start = c.span.start;
    const source = sources[c.sourceIndex];
    if (c.prev && source && LEANS_BACK.test(c.span.text)) {
      // Only reach back over text we actually hold; a filled gap between merged chunks is not.
      if (coveredByParts(source, source.start + c.prev.start, source.start + c.span.end)) start = c.prev.start;
    }
    return { sourceIndex: c.sourceIndex, start, end: c.span.end };
  });
  raw.sort((a, b) => a.sourceIndex - b.sourceIndex || a.start - b.start);
  const merged: Piece[] = [];
  for (const p of raw) {
    const last = merged[merged.length - 1];
    const text = sources[p.sourceIndex]?.text ?? '';
    if (last && last.sourceIndex === p.sourceIndex && (p.start <= last.end || /^[^\S\n]*$/.test(text.slice(last.end, p.start)))) {
      last.end = Math.max(last.end, p.end);
    } else {
      merged.push({ ...p });
    }
  }
  return merged;
}

function dot(a: Float32Array, b: Float32Array): number {
  let s = 0;
  const n = Math.min(a.length, b.length);
  for (let i = 0; i < n; i++) s += (a[i] ?? 0) * (b[i] ?? 0);
  return s;
}

/**
 * How well the best single sentence of the context covers the question's terms, counting a
 * term found only in its headings or table header at `contextCredit`: the evidence test.
 */
export function questionCoverage(
  question: string,
  sources: ContextSource[],
  contextCredit = 0.5,
  kindMissPenalty = DEFAULT_KIND_MISS_PENALTY,
  commonTerms: ReadonlySet<string> = new Set(),
): number {
  const cands = candidates(sources);
  if (cands.length === 0) return 0;
  const terms = questionTerms(question);
  if (terms.length === 0) return 0;
  const weights = termWeights(terms, cands, commonTerms);
  let best = 0;
  const cue = answerCue(question);
  for (const c of cands) {
    c.coverage = termCoverage(terms, weights, c, contextCredit);
    best = Math.max(best, evidence(c, cue, kindMissPenalty));
  }
  return best;
}

/** Topic terms of the question that no sentence or heading of the context holds. */
export function absentTerms(question: string, sources: ContextSource[]): QuestionTerm[] {
  const cands = candidates(sources);
  return questionTerms(question).filter((t) => !isLightTerm(t) && !cands.some((c) => holds(t, c) || termIn(t, c.context)));
}
