// The offline answer: the sentences of the context that best answer the question, quoted
// verbatim with their citations. Used when no completion endpoint is configured or it fails.

import type { Embedder } from '../embed/types.js';
import type { Citation } from '../types.js';
import { headingSet } from './abstain.js';
import { answerCue, cueBonus } from './cues.js';
import { citationFor, coveredByParts } from './cite.js';
import { isPlantedInstruction } from './planted.js';
import { isJunkSentence, splitSentences, type SentenceSpan } from './sentences.js';
import { questionTerms, termIn, type QuestionTerm } from './synonyms.js';
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
}

interface Candidate {
  sourceIndex: number;
  span: SentenceSpan;
  /** The raw sentence just before this one in its source, when it is prose. */
  prev: SentenceSpan | null;
  stems: Set<string>;
  /** Stems of the headings above the sentence and, for a table row, of the header row. */
  context: Set<string>;
  coverage: number;
  score: number;
  cosine: number | null;
}

// Sentences opening with these lean on the sentence before them for their meaning.
const LEANS_BACK =
  /^(?:this|that|these|those|it|its|they|their|them|such|however|but|also|otherwise|therefore|thus|instead|in (?:this|that|such) case|as a result|in addition|then)\b/i;

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
  const none: ExtractResult = { answer: '', citations: [], support: 0, cosine: null };
  if (cands.length === 0) return none;

  const contextCredit = opts.contextCredit ?? 0.5;
  const cue = answerCue(question);
  let terms = questionTerms(question);
  if (terms.length === 0) terms = tokenize(question).map((t) => ({ label: t.word, alts: [[t.stem]] }));
  const weights = termWeights(terms, cands);
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
  if (!best || best.coverage <= 0) return none;

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
  sourceOrder.forEach((si, i) => {
    const source = sources[si];
    if (!source) return;
    for (const p of pieces.filter((x) => x.sourceIndex === si)) {
      const cite = citationFor(source, p.start, p.end, i + 1);
      citations.push(cite);
      parts.push(`${display(cite.quote)} [${i + 1}]`);
    }
  });

  return {
    answer: parts.join(' '),
    citations,
    support: best.coverage,
    cosine: best.cosine,
  };
}

/** The answer shows table rows and list items as plain text; the citation keeps the exact quote. */
function display(quote: string): string {
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
      out.push({ sourceIndex, span, prev, stems: contentStems(span.text), context, coverage: 0, score: 0, cosine: null });
      prev = span;
    }
  });
  return out;
}

/**
 * BM25-style idf of each term over the candidate sentences (with their headings), as in
 * Lucene: ln(1 + (N − df + 0.5)/(df + 0.5)). A term no candidate holds weighs most.
 */
function termWeights(terms: QuestionTerm[], cands: Candidate[]): number[] {
  const n = cands.length;
  return terms.map((t) => {
    let df = 0;
    for (const c of cands) if (termIn(t, c.stems) || termIn(t, c.context)) df++;
    return Math.log(1 + (n - df + 0.5) / (df + 0.5));
  });
}

function termCoverage(terms: QuestionTerm[], weights: number[], c: Candidate, contextCredit: number): number {
  let total = 0;
  let hit = 0;
  terms.forEach((t, i) => {
    const w = weights[i] ?? 0;
    total += w;
    if (termIn(t, c.stems)) hit += w;
    else if (termIn(t, c.context)) hit += contextCredit * w;
  });
  return total > 0 ? hit / total : 0;
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
