import type { ChunkDraft, NormalisedDocument, PageBreak, PlacedBlock, TokenCounter } from '../types.js';
import { LimitExceeded, NO_DEADLINE, type Deadline } from './budget.js';
import { splitSentences } from './sentences.js';

export interface ChunkOptions {
  /** Blocks are packed until a chunk would pass this many tokens. */
  targetTokens: number;
  /** Hard limit: no chunk is ever longer. */
  maxTokens: number;
  /** A chunk that continues a section may repeat up to this many tokens of the previous chunk's last sentences. */
  overlapTokens: number;
  countTokens: TokenCounter;
  /** Locale for sentence boundaries. */
  locale?: string;
  /** Most chunks made; one more throws LimitExceeded (`limits.documentMaxChunks`) before it is made. */
  maxChunks?: number;
  /** Checked between blocks and units, so a slow document stops within its time budget. */
  deadline?: Deadline;
}

interface Span {
  start: number;
  end: number;
}

/** A place where a chunk may start: a sentence, line or word-group start. */
interface Piece extends Span {
  block: number;
  section: number;
  heading: boolean;
}

interface OpenChunk extends Span {
  hasBody: boolean;
  pieces: Piece[];
}

// A base character with its combining marks and zero-width-joined followers: close enough to a
// UAX #29 grapheme cluster for cutting, and linear where Intl.Segmenter's grapheme iterator
// took seconds on a 30,000-character run.
const CLUSTER = /\P{M}(?:\p{M}|\u200D\P{M})*|\p{M}+/gu;

function lineSpans(text: string, offset: number): Span[] {
  const spans: Span[] = [];
  for (const m of text.matchAll(/[^\n]+/g)) {
    const lead = m[0].length - m[0].trimStart().length;
    const t = m[0].trim();
    if (t !== '') spans.push({ start: offset + m.index + lead, end: offset + m.index + lead + t.length });
  }
  return spans;
}

/** Natural units of a block: whole heading, sentences of prose, lines of tables, lists and code. */
function unitSpans(block: PlacedBlock, locale: string): Span[] {
  if (block.kind === 'heading') return [{ start: block.start, end: block.end }];
  if (block.kind === 'paragraph') {
    return splitSentences(block.text, locale).map((s) => ({ start: block.start + s.start, end: block.start + s.end }));
  }
  // Never split inside a table row or list item: lines are the smallest unit.
  return lineSpans(block.text, block.start);
}

/**
 * Groups consecutive units greedily into the longest runs that `fits`, finding each run's end by
 * galloping then bisecting, so a long run costs O(log n) counts instead of one per unit.
 * A unit that does not fit on its own comes back alone, flagged `tooBig`.
 */
function greedyRuns(units: Span[], fits: (start: number, end: number) => boolean): (Span & { tooBig: boolean })[] {
  const runs: (Span & { tooBig: boolean })[] = [];
  let i = 0;
  while (i < units.length) {
    const start = units[i]!.start;
    if (!fits(start, units[i]!.end)) {
      runs.push({ ...units[i]!, tooBig: true });
      i++;
      continue;
    }
    let good = i;
    let step = 1;
    while (good + step < units.length && fits(start, units[good + step]!.end)) {
      good += step;
      step *= 2;
    }
    let bad = Math.min(good + step, units.length);
    while (bad - good > 1) {
      const mid = (good + bad) >> 1;
      if (fits(start, units[mid]!.end)) good = mid;
      else bad = mid;
    }
    runs.push({ start, end: units[good]!.end, tooBig: false });
    i = good + 1;
  }
  return runs;
}

/**
 * Cuts a span that alone exceeds `max` into word groups, and a word that alone exceeds it into
 * runs of whole characters (a character never loses its combining marks).
 */
function fitSpan(text: string, span: Span, max: number, count: TokenCounter): Span[] {
  const fits = (start: number, end: number): boolean => count(text.slice(start, end)) <= max;
  const words = [...text.slice(span.start, span.end).matchAll(/\S+/g)].map((m) => ({
    start: span.start + m.index,
    end: span.start + m.index + m[0].length,
  }));
  const out: Span[] = [];
  for (const run of greedyRuns(words, fits)) {
    if (!run.tooBig) {
      out.push({ start: run.start, end: run.end });
      continue;
    }
    const chars = [...text.slice(run.start, run.end).matchAll(CLUSTER)].map((m) => ({
      start: run.start + m.index,
      end: run.start + m.index + m[0].length,
    }));
    for (const piece of greedyRuns(chars, fits)) {
      if (piece.tooBig) {
        throw new Error(`maxTokens (${max}) is too small to hold the character "${text.slice(piece.start, piece.end)}"`);
      }
      out.push({ start: piece.start, end: piece.end });
    }
  }
  return out;
}

function firstBlockEndingAfter(blocks: PlacedBlock[], offset: number): number {
  let lo = 0;
  let hi = blocks.length;
  while (lo < hi) {
    const mid = (lo + hi) >> 1;
    if (blocks[mid]!.end <= offset) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}

/**
 * The pages of the document span [start, end) that the blocks cover: the page of its first
 * character, the last page, and every later page's first offset inside the span, so a quote can be
 * placed on the page it is printed on rather than the page the chunk starts on.
 */
function pagesOf(covered: PlacedBlock[], start: number, end: number): { first: number | null; last: number | null; breaks: PageBreak[] } {
  // Each block begins on its page; a paragraph that runs on over a page break says where the next begins.
  const marks: PageBreak[] = [];
  for (const b of covered) {
    if (b.page === undefined) continue;
    marks.push({ at: b.start, page: b.page });
    for (const p of b.pageBreaks ?? []) marks.push({ at: b.start + p.at, page: p.page });
  }
  let first: number | null = null;
  let last: number | null = null;
  const breaks: PageBreak[] = [];
  for (const m of marks) {
    if (m.at >= end) break;
    if (m.at <= start) first = m.page;
    else if (first === null) first = m.page;
    else if (m.page !== (breaks[breaks.length - 1]?.page ?? first)) breaks.push({ at: m.at, page: m.page });
    last = last === null ? m.page : Math.max(last, m.page);
  }
  return { first, last, breaks };
}

/**
 * Splits a normalised document into chunks that follow its structure: each heading starts a
 * chunk, whole blocks are packed up to `targetTokens`, an oversized block is split at sentence
 * (or, for tables and lists, line) boundaries, and only a unit that alone passes `maxTokens` is cut
 * between words. Every chunk is an exact span of `doc.text`; together they cover all of its
 * non-whitespace characters.
 */
export function chunkDocument(doc: NormalisedDocument, opts: ChunkOptions): ChunkDraft[] {
  const count = opts.countTokens;
  const max = Math.floor(opts.maxTokens);
  if (!(max >= 1)) throw new Error(`maxTokens must be at least 1 (got ${opts.maxTokens})`);
  const target = Math.max(1, Math.min(Math.floor(opts.targetTokens), max));
  const overlap = Math.max(0, Math.floor(opts.overlapTokens));
  const locale = opts.locale ?? 'en';
  const maxChunks = opts.maxChunks ?? Infinity;
  const deadline = opts.deadline ?? NO_DEADLINE;
  const { text, blocks } = doc;
  const tokensOf = (s: Span): number => count(text.slice(s.start, s.end));

  const drafts: ChunkDraft[] = [];
  let cur: OpenChunk | null = null;
  let prev: OpenChunk | null = null;
  let section = 0;

  const close = (): void => {
    if (!cur) return;
    if (drafts.length >= maxChunks) {
      throw new LimitExceeded(
        'documentMaxChunks',
        `the document needs more than ${maxChunks.toLocaleString('en-US')} chunks (limits.documentMaxChunks); stopped at character ${cur.start.toLocaleString('en-US')} of ${text.length.toLocaleString('en-US')}`,
      );
    }
    const chunkText = text.slice(cur.start, cur.end);
    const covered: PlacedBlock[] = [];
    for (let i = firstBlockEndingAfter(blocks, cur.start); i < blocks.length && blocks[i]!.start < cur.end; i++) {
      covered.push(blocks[i]!);
    }
    const firstBody = cur.pieces.find((p) => !p.heading);
    const pathBlock = firstBody ? blocks[firstBody.block]! : blocks[cur.pieces[cur.pieces.length - 1]!.block]!;
    const pages = pagesOf(covered, cur.start, cur.end);
    drafts.push({
      ordinal: drafts.length,
      text: chunkText,
      start: cur.start,
      end: cur.end,
      headingPath: [...pathBlock.headingPath],
      pageStart: pages.first,
      pageEnd: pages.last,
      pageBreaks: pages.breaks,
      tokenCount: count(chunkText),
    });
    prev = cur;
    cur = null;
  };

  /** Opens a chunk at `unit`, reaching back into the previous chunk for overlap where allowed. */
  const open = (unit: Piece[]): void => {
    const first = unit[0]!;
    const end = unit[unit.length - 1]!.end;
    let pieces = unit;
    const last: OpenChunk | null = prev;
    if (overlap > 0 && !first.heading && last && last.end <= first.start) {
      const carried: Piece[] = [];
      // The previous chunk's first piece never carries over: the new chunk would swallow it whole.
      for (let i = last.pieces.length - 1; i >= 1; i--) {
        const p = last.pieces[i]!;
        if (p.heading || p.section !== first.section) break;
        if (count(text.slice(p.start, last.end)) > overlap) break;
        carried.unshift(p);
      }
      while (carried.length > 0 && count(text.slice(carried[0]!.start, end)) > max) carried.shift();
      pieces = [...carried, ...unit];
    }
    cur = { start: pieces[0]!.start, end, hasBody: pieces.some((p) => !p.heading), pieces: [...pieces] };
  };

  const extend = (unit: Piece[]): void => {
    cur!.end = unit[unit.length - 1]!.end;
    cur!.pieces.push(...unit);
    if (unit.some((p) => !p.heading)) cur!.hasBody = true;
  };

  /** Adds one piece (≤ max tokens) under the target rule. */
  const addPiece = (piece: Piece): void => {
    if (cur && count(text.slice(cur.start, piece.end)) <= (cur.hasBody ? target : max)) extend([piece]);
    else {
      close();
      open([piece]);
    }
  };

  blocks.forEach((block, index) => {
    deadline.check('splitting the text into chunks');
    const isHeading = block.kind === 'heading';
    if (isHeading) {
      section++;
      // A run of headings stays together so that no chunk is a bare heading.
      if (cur?.hasBody) close();
    }
    const toPieces = (spans: Span[]): Piece[] =>
      spans.map((s) => ({ ...s, block: index, section, heading: isHeading }));
    const units = unitSpans(block, locale);
    if (units.length === 0) return;
    if (!isHeading) {
      const whole = toPieces(units);
      if (cur && count(text.slice(cur.start, block.end)) <= (cur.hasBody ? target : max)) {
        extend(whole);
        return;
      }
      if (tokensOf(block) <= target && (!cur || cur.hasBody)) {
        close();
        open(whole);
        return;
      }
    }
    for (const unit of units) {
      deadline.check('splitting the text into chunks');
      const spans = tokensOf(unit) <= max ? [unit] : fitSpan(text, unit, max, count);
      for (const piece of toPieces(spans)) addPiece(piece);
    }
  });
  close();
  return drafts;
}
