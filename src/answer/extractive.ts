// The offline answer: the sentences of the context that best answer the question, quoted
// verbatim with their citations. Used when no completion endpoint is configured or it fails.
//
// Each candidate sentence is described by a few evidence features (how much of the question it
// covers on its own and with its heading, table header and the sentence before it; whether it
// holds the type of fact asked for; how well its passage was retrieved; its vector similarity)
// and ranked by a logistic model over them, fitted across corpora (evidence.ts, fitted-model.ts).

import type { Embedder } from '../embed/types.js';
import type { Citation } from '../types.js';
import { headingSet } from './abstain.js';
import { answerCue, holdsKind, isStrictKind, type AnswerKind } from './cues.js';
import { citationFor, coveredByParts } from './cite.js';
import { SENTENCE_FEATURES, logistic, type LinearModel } from './evidence.js';
import { FITTED_MODEL } from './fitted-model.js';
import { taintedSentences } from './planted.js';
import { LEADER_ROW } from '../ingest/load-text.js';
import { isJunkSentence, leansBack, splitSentences, tableHeader, type SentenceSpan } from './sentences.js';
import { isLightTerm, questionTerms, relatedIn, termMatch, type Lexicon, type QuestionTerm } from './terms.js';
import type { ContextSource } from './types.js';
import { contentStems, contentTokens, tokenize } from './words.js';
import { dot } from '../numbers.js';
import { softCoverage, type WordVectors } from './word-vectors.js';

export interface ExtractOptions {
  embedder?: Embedder;
  lexicon?: Lexicon;
  /** The sentence ranker (default: the fitted one). */
  ranker?: LinearModel;
  /** At most this many answer sentences (default: the fitted model's). */
  maxSentences?: number;
  /** A further sentence is used only if its probability is at least this share of the best (default: the fitted model's). */
  closeRatio?: number;
}

/** A candidate sentence with its evidence and the ranker's probability that it holds the answer. */
export interface RankedSentence {
  sourceIndex: number;
  start: number;
  end: number;
  text: string;
  features: number[];
  p: number;
}

export interface QuestionAnalysis {
  kind: AnswerKind | null;
  terms: QuestionTerm[];
  weights: number[];
}

export interface ExtractResult {
  answer: string;
  citations: Citation[];
  /** Candidates best first (at most MAX_RANKED). */
  ranked: RankedSentence[];
  question: QuestionAnalysis;
}

interface Candidate {
  sourceIndex: number;
  span: SentenceSpan;
  /** The raw sentence just before this one in its source, when it is prose. */
  prev: SentenceSpan | null;
  stems: Set<string>;
  /** Stems of the headings above the sentence, a table row's header, and the sentence before it. */
  context: Set<string>;
  /** Stems of the headings and table header alone. */
  heading: Set<string>;
  /** Stems of the sentence before it (prose only). */
  before: Set<string>;
  /** The first candidate under its heading. */
  first: boolean;
  ranges: [number, number][];
  row: boolean;
}

// Embedding every sentence is the costly step; beyond this many we keep the lexically best.
const MAX_EMBEDDED = 200;
// Candidates kept in the result, for the evidence features and for fitting.
const MAX_RANKED = 120;
// Framing words keep a little weight: enough to break ties, too little for their absence to sink a question.
const LIGHT_SHARE = 0.3;

/** Analyses the question against the candidates' collection: its terms, their weights and the type asked for. */
export function analyseQuestion(question: string, cands: { stems: Set<string>; context: Set<string> }[], lexicon: Lexicon = {}): QuestionAnalysis {
  let terms = questionTerms(question, lexicon);
  if (terms.length === 0) terms = tokenize(question).map((t) => ({ label: t.word, alts: [[t.stem]], near: [], related: [], known: true }));
  const vocab = lexicon.vocabulary;
  const weights = terms.map((t) => {
    // BM25's idf (Robertson and Zaragoza 2009, in Lucene's non-negative form) over the collection's
    // lines when its vocabulary is known, else over the candidates themselves.
    let n: number;
    let df: number;
    if (vocab && vocab.lines > 0) {
      n = vocab.lines;
      df = Math.max(...t.alts.map((a) => Math.min(...a.map((s) => vocab.df(s)))), ...t.near.map((s) => vocab.df(s)), 0);
    } else {
      n = cands.length;
      df = cands.filter((c) => termMatch(t, c.stems) > 0 || termMatch(t, c.context) > 0).length;
    }
    const idf = Math.log(1 + (n - df + 0.5) / (df + 0.5));
    return isLightTerm(t) ? LIGHT_SHARE * idf : idf;
  });
  return { kind: answerCue(question), terms, weights };
}

export async function extractAnswer(question: string, sources: ContextSource[], opts: ExtractOptions = {}): Promise<ExtractResult> {
  const cands = candidates(sources);
  const analysis = analyseQuestion(question, cands, opts.lexicon);
  const none: ExtractResult = { answer: '', citations: [], ranked: [], question: analysis };
  if (cands.length === 0) return none;
  const ranker = opts.ranker ?? FITTED_MODEL.sentence;
  const qStems = new Set(analysis.terms.flatMap((t) => [...t.alts.flat(), ...t.near]));
  const maxScore = Math.max(...sources.map((s) => s.score), 1e-9);

  const passage = sources.map((s) => contentStems(`${s.section} ${s.text}`));
  const passageCover = passage.map((stems) => weightedShare(analysis, (t) => termMatch(t, stems)));
  const scored = cands.map((c) => {
    const f = sentenceFeatures(c, analysis, qStems, sources[c.sourceIndex]?.score ?? 0, maxScore, passageCover[c.sourceIndex] ?? 0, opts.lexicon?.vectors);
    return { c, f, cos: 0 };
  });
  if (opts.embedder) {
    // Vector similarity for the lexically most promising sentences only.
    const pool = [...scored].sort((a, b) => b.f[1]! - a.f[1]! || b.f[0]! - a.f[0]!).slice(0, MAX_EMBEDDED);
    const vectors = await opts.embedder.embed([question, ...pool.map((s) => s.c.span.text)]);
    const qv = vectors[0];
    if (qv) pool.forEach((s, i) => (s.cos = Math.max(0, dot(qv, vectors[i + 1] ?? new Float32Array()))));
  }
  const ranked: RankedSentence[] = scored
    .map(({ c, f, cos }) => {
      const features = [...f.slice(0, COS_AT), cos, ...f.slice(COS_AT)];
      return { sourceIndex: c.sourceIndex, start: c.span.start, end: c.span.end, text: c.span.text, features, p: logistic(ranker, features) };
    })
    .sort((a, b) => b.p - a.p || a.sourceIndex - b.sourceIndex || a.start - b.start);

  const chosen = chooseSentences(ranked, opts.maxSentences ?? FITTED_MODEL.composition.maxSentences, opts.closeRatio ?? FITTED_MODEL.composition.closeRatio);
  const { answer, citations } = quote(chosen, cands, sources);
  return { answer, citations, ranked: ranked.slice(0, MAX_RANKED), question: analysis };
}

/**
 * The best sentence and the next ones close to it in probability, without repeats. A further
 * sentence must share at least one question term (itself or through its headings and the sentence
 * before it): one that shares none is never part of the answer, however the ranker scored it.
 */
export function chooseSentences<T extends { text: string; p: number; features: readonly number[] }>(ranked: T[], maxSentences: number, closeRatio: number): T[] {
  const best = ranked[0];
  if (!best) return [];
  const chosen = [best];
  const seen = new Set([best.text]);
  for (const r of ranked.slice(1)) {
    if (chosen.length >= maxSentences || r.p < closeRatio * best.p) break;
    if (seen.has(r.text) || !((r.features[CONTEXT_AT] ?? 0) > 0)) continue;
    seen.add(r.text);
    chosen.push(r);
  }
  return chosen;
}

// Index of the context coverage in the feature vector (see SENTENCE_FEATURES).
const CONTEXT_AT = SENTENCE_FEATURES.indexOf('contextCoverage');

// Index of the cosine in the feature vector (see SENTENCE_FEATURES).
const COS_AT = SENTENCE_FEATURES.indexOf('cosine');

/** Features of one sentence, without the cosine (inserted at COS_AT once embedded). */
/** Weighted share of the question's terms by a per-term match in 0..1. */
function weightedShare(q: QuestionAnalysis, match: (t: QuestionTerm) => number): number {
  let total = 0;
  let hit = 0;
  q.terms.forEach((t, i) => {
    const w = q.weights[i] ?? 0;
    total += w;
    hit += w * match(t);
  });
  return total > 0 ? hit / total : 0;
}

// The question's one-word terms with their weights, for soft matching by word vectors.
function singleWordTerms(q: QuestionAnalysis): { label: string; weight: number }[] {
  return q.terms.flatMap((t, i) => (t.label.includes(' ') ? [] : [{ label: t.label, weight: q.weights[i] ?? 0 }]));
}

function sentenceFeatures(c: Candidate, q: QuestionAnalysis, qStems: Set<string>, sourceScore: number, maxScore: number, passageCoverage: number, vectors: WordVectors | undefined): number[] {
  let total = 0;
  let own = 0;
  let withContext = 0;
  let related = 0;
  q.terms.forEach((t, i) => {
    const w = q.weights[i] ?? 0;
    total += w;
    const m = Math.max(termMatch(t, c.stems), holdsNumber(t, c) ? 1 : 0);
    own += w * m;
    const mc = Math.max(m, termMatch(t, c.context));
    withContext += w * mc;
    if (mc === 0 && (relatedIn(t, c.stems) || relatedIn(t, c.context))) related += w;
  });
  const strict = isStrictKind(q.kind);
  const hasKind = q.kind !== null && holdsKind(q.kind, c.span.text);
  let shared = 0;
  for (const s of c.stems) if (qStems.has(s)) shared++;
  const words = c.span.text.split(/\s+/).length;
  // Order must match SENTENCE_FEATURES (without 'cosine').
  return [
    total > 0 ? own / total : 0,
    total > 0 ? withContext / total : 0,
    weightedShare(q, (t) => termMatch(t, c.heading)),
    weightedShare(q, (t) => termMatch(t, c.before)),
    c.first ? 1 : 0,
    total > 0 ? related / total : 0,
    passageCoverage,
    strict && hasKind ? 1 : 0,
    strict && !hasKind ? 1 : 0,
    q.kind === 'rule' && hasKind ? 1 : 0,
    1 / (1 + c.sourceIndex),
    maxScore > 0 ? sourceScore / maxScore : 0,
    c.stems.size > 0 ? shared / c.stems.size : 0,
    words < 5 ? 1 : 0,
    c.row ? 1 : 0,
    vectors ? softCoverage(vectors, singleWordTerms(q), contentTokens(c.span.text).map((t) => t.word)) : 0,
  ];
}

/** The answer text and citations for the chosen sentences (plus a leading sentence where needed). */
function quote(chosen: RankedSentence[], cands: Candidate[], sources: ContextSource[]): { answer: string; citations: Citation[] } {
  const byStart = new Map(cands.map((c) => [`${c.sourceIndex}:${c.span.start}`, c]));
  const pieces = toPieces(
    chosen.map((r) => byStart.get(`${r.sourceIndex}:${r.start}`)).filter((c): c is Candidate => c !== undefined),
    sources,
  );
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
  return { answer: parts.join(' '), citations };
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

/** A line of a leader table ("Opening hours ........ 9:00-17:00") or a pipe table ("| a | b |"). */
function isTableLine(line: string): boolean {
  return LEADER_ROW.test(line) || /^\s*\|.*\|\s*$/.test(line) || /\S\s+\|\s+\S.*\S\s+\|\s+\S/.test(line);
}

/**
 * Sentence spans, with each line of a table or leader block as its own record. Table lines are
 * found before sentence splitting: a leader row's dots look like an ellipsis to UAX #29, which
 * would otherwise end a "sentence" inside the row and glue its label to the row above.
 */
function recordSpans(text: string): SentenceSpan[] {
  const lines: { text: string; start: number }[] = [];
  let at = 0;
  for (const line of text.split('\n')) {
    lines.push({ text: line, start: at });
    at += line.length + 1;
  }
  const table = lines.map((l) => isTableLine(l.text));
  // A table is two or more table lines in a row; a lone line with dots or bars stays prose.
  const inTable = table.map((t, i) => t && (table[i - 1] === true || table[i + 1] === true));
  const out: SentenceSpan[] = [];
  let proseFrom = 0;
  const flushProse = (to: number): void => {
    if (to > proseFrom) {
      for (const s of splitSentences(text.slice(proseFrom, to))) out.push({ text: s.text, start: s.start + proseFrom, end: s.end + proseFrom });
    }
  };
  lines.forEach((line, i) => {
    if (!inTable[i]) return;
    flushProse(line.start);
    const lead = line.text.length - line.text.trimStart().length;
    const body = line.text.trim();
    if (body) out.push({ text: body, start: line.start + lead, end: line.start + lead + body.length });
    proseFrom = line.start + line.text.length + 1;
  });
  flushProse(text.length);
  return out;
}

// A bulleted or numbered list item as the loaders write it ("- ", "• ", "1. ", "a) ").
const LIST_ITEM = /^(?:[-*•◦▪]|\d{1,2}[.)]|[a-z][.)])\s/u;

/** Every quotable sentence of the context; planted instructions and the sentences around them are never quotable. */
export function candidates(sources: ContextSource[]): Candidate[] {
  const out: Candidate[] = [];
  sources.forEach((source, sourceIndex) => {
    const headings = headingSet(source);
    const spans = recordSpans(source.text);
    // A planted instruction and the sentences of its block (the false statement it wants repeated).
    const tainted = taintedSentences(source.text, spans);
    let prev: SentenceSpan | null = null;
    // The sentence that leads into a list ("You do not need our permission to keep:").
    let leadIn: SentenceSpan | null = null;
    let lastSection: string | null = null;
    for (const [i, span] of spans.entries()) {
      if (isJunkSentence(span.text, headings) || tainted[i]) {
        prev = null;
        leadIn = null;
        continue;
      }
      const row = LEADER_ROW.test(span.text) || span.text.includes('|');
      const item = LIST_ITEM.test(span.text);
      const section = sectionAt(source, span.start);
      const heading = contentStems(`${section} ${tableHeader(source.text, span)}`);
      // A list item's context is its lead-in, not the sibling item before it.
      const said = item ? leadIn : prev;
      const before = said && !row ? contentStems(said.text) : new Set<string>();
      if (!item) leadIn = span;
      const context = new Set([...heading, ...before]);
      out.push({ sourceIndex, span, prev, stems: contentStems(span.text), context, heading, before, first: section !== lastSection, ranges: numericRanges(span.text), row });
      lastSection = section;
      prev = span;
    }
  });
  return out;
}

/** A bare number in the question that falls inside a range the sentence states ("aged 9" in "under 10"). */
function holdsNumber(t: QuestionTerm, c: Candidate): boolean {
  const only = t.alts.length === 1 && t.alts[0]?.length === 1 ? t.alts[0][0] : undefined;
  if (only === undefined || !/^\d+(?:\.\d+)?$/.test(only)) return false;
  const x = Number(only);
  // A bare four-digit number from 1000 to 2999 is a year: a date, not a quantity a range bounds.
  if (/^[12]\d{3}$/.test(only)) return false;
  return c.ranges.some(([lo, hi]) => x >= lo && x <= hi);
}

/** "30 to 59", "15–29", "60 minutes or more", "66 or over", "under 10" as inclusive ranges. */
export function numericRanges(text: string): [number, number][] {
  const out: [number, number][] = [];
  for (const m of text.matchAll(/(\d+(?:\.\d+)?)\s*(?:to|–|-)\s*(\d+(?:\.\d+)?)(?![:.]\d)/g)) {
    const lo = Number(m[1]);
    const hi = Number(m[2]);
    if (lo < hi) out.push([lo, hi]);
  }
  for (const m of text.matchAll(/(\d+(?:\.\d+)?)\s+(?:[a-z]+\s+)?(?:or|and)\s+(?:more|over|above|older|longer)\b/gi)) out.push([Number(m[1]), Infinity]);
  for (const m of text.matchAll(/\b(?:under|below|younger than|less than)\s+(\d+(?:\.\d+)?)/gi)) out.push([0, Number(m[1]) - 1e-9]);
  return out;
}

/** The heading path of the chunk holding offset `at` of the source text. */
function sectionAt(source: ContextSource, at: number): string {
  const abs = source.start + at;
  const part = source.parts.find((p) => abs >= p.start && abs < p.end);
  return part?.section ?? source.section;
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
    if (c.prev && source && leansBack(c.span.text)) {
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
