import type { Block, LoadedDocument } from '../types.js';
import { findEffectiveDate, withVersion } from './effective-date.js';
import { titleFromFileName } from './load-text.js';
import { cleanBlocks } from './normalise.js';

export const NO_TEXT_MESSAGE = 'no extractable text (scanned image? OCR is not supported)';
export const ENCRYPTED_MESSAGE = 'encrypted PDF (password protected) is not supported';

// How many lines at each page edge may hold running headers or footers.
const EDGE_LINES = 3;
// A line shorter than this share of the document's typical line length ends a paragraph when it
// also ends a sentence: full lines wrap, short ones stop.
const SHORT_LINE_SHARE = 0.8;
const TERMINAL = /[.!?:]["'’”)\]]?$/u;
const BULLET = /^(?:[•‣◦▪●■–-]|\(?[a-z0-9]{1,3}\)|\d{1,2}\.)\s+\S/u;
const NUMBERED = /^(\d{1,2}(?:\.\d{1,2})*)\.?\s+(\p{Lu}.*)$/u;
const PAGE_NUMBER = /^(?:(?:page|p\.|pg\.?)\s*)?\d{1,4}(?:\s*(?:of|\/)\s*\d{1,4})?$|^[-–—]\s*\d{1,4}\s*[-–—]$/i;
const MINOR_WORDS = new Set(['a', 'an', 'and', 'as', 'at', 'by', 'for', 'from', 'in', 'of', 'on', 'or', 'per', 'the', 'to', 'with', 'via', 'vs']);

interface RawText {
  pages: string[];
  info: Record<string, unknown>;
}

/** Bounds on one PDF: a hostile or runaway file must not hold the ingest worker for long. */
export interface PdfLimits {
  /** Most pages read; a longer PDF is refused before any page is parsed. */
  maxPages: number;
  /** Wall-clock budget for reading the text; checked between batches of pages. */
  maxSeconds: number;
}

export const DEFAULT_PDF_LIMITS: PdfLimits = { maxPages: 2000, maxSeconds: 120 };

// Pages parsed per call, so the time budget is checked often without paying a call per page.
const PAGE_BATCH = 16;

async function extract(bytes: Uint8Array, limits: PdfLimits, now: () => number): Promise<RawText> {
  const { PDFParse } = await import('pdf-parse');
  // pdf.js transfers (detaches) the buffer it is given; the caller's bytes must survive.
  const parser = new PDFParse({ data: bytes.slice(), verbosity: 0 });
  const started = now();
  try {
    const info = await parser.getInfo();
    const total = info.total;
    if (total > limits.maxPages) {
      throw new PdfLimitError(`PDF has ${total} pages, over the limit of ${limits.maxPages} (limits.pdfMaxPages)`);
    }
    const pages: string[] = [];
    for (let first = 1; first <= total; first += PAGE_BATCH) {
      if ((now() - started) / 1000 > limits.maxSeconds) {
        throw new PdfLimitError(
          `reading the PDF took longer than ${limits.maxSeconds} s (limits.pdfMaxSeconds); ${pages.length} of ${total} pages read`,
        );
      }
      const last = Math.min(total, first + PAGE_BATCH - 1);
      const text = await parser.getText({ first, last });
      pages.push(...[...text.pages].sort((a, b) => a.num - b.num).map((p) => p.text));
    }
    return { pages, info: (info.info ?? {}) as Record<string, unknown> };
  } catch (err) {
    if (err instanceof PdfLimitError) throw err;
    const name = err instanceof Error ? err.name : '';
    const detail = err instanceof Error ? err.message : String(err);
    if (name === 'PasswordException') {
      throw new Error(ENCRYPTED_MESSAGE, { cause: err });
    }
    throw new Error(`not a readable PDF (corrupt or truncated file): ${detail}`, { cause: err });
  } finally {
    await parser.destroy().catch(() => undefined);
  }
}

/** A PDF refused for its size or the time it takes; the message names the limit. */
export class PdfLimitError extends Error {
  override name = 'PdfLimitError';
}

function edgeKey(line: string): string {
  return line.toLowerCase().replace(/\d+/g, '#').replace(/\s+/g, ' ').trim();
}

/**
 * Drops running headers and footers: lines at a page edge that recur (digits ignored, so
 * "Page 2 of 5" matches "Page 3 of 5") on at least half the pages, plus bare page numbers.
 */
export function removeRunningLines(pages: string[][]): string[][] {
  const trimmed = pages.map((lines) => lines.map((l) => l.replace(/\s+/g, ' ').trim()).filter((l) => l !== ''));
  const repeated = new Set<string>();
  if (trimmed.length >= 2) {
    const seen = new Map<string, number>();
    for (const lines of trimmed) {
      const edge = new Set([...lines.slice(0, EDGE_LINES), ...lines.slice(-EDGE_LINES)].map(edgeKey));
      for (const key of edge) seen.set(key, (seen.get(key) ?? 0) + 1);
    }
    const needed = Math.max(2, Math.ceil(trimmed.length / 2));
    for (const [key, count] of seen) if (count >= needed) repeated.add(key);
  }
  const running = (line: string): boolean => repeated.has(edgeKey(line)) || PAGE_NUMBER.test(line);
  return trimmed.map((lines) => {
    let start = 0;
    let end = lines.length;
    while (start < end && start < EDGE_LINES && running(lines[start]!)) start++;
    while (end > start && lines.length - end < EDGE_LINES && running(lines[end - 1]!)) end--;
    return lines.slice(start, end);
  });
}

/** "supervi-" + "sors and staff" → "supervisors" + "and staff": only lower-case on both sides. */
export function rejoinHyphenated(lines: string[]): string[] {
  const out = [...lines];
  for (let i = 0; i + 1 < out.length; i++) {
    const line = out[i]!;
    const next = out[i + 1]!;
    if (!/\p{Ll}-$/u.test(line) || !/^\p{Ll}/u.test(next)) continue;
    const m = /^(\S+)\s*(.*)$/u.exec(next)!;
    out[i] = line.slice(0, -1) + m[1]!;
    if (m[2] === '') out.splice(i + 1, 1);
    else out[i + 1] = m[2]!;
    i--;
  }
  return out;
}

/** Numbered depth (≥ 1) for "3.2 Heading", 0 for an unnumbered heading, null for body text. */
export function headingShape(line: string): number | null {
  const t = line.trim();
  if (t.length > 80 || t.split(/\s+/).length > 12 || /[.,;:!]$/.test(t) || !/\p{L}/u.test(t)) return null;
  const words = t.split(/\s+/).filter((w) => /\p{L}/u.test(w));
  const caps = !/\p{Ll}/u.test(t) && (t.match(/\p{Lu}/gu)?.length ?? 0) >= 3;
  const titleCase = words.every((w) => MINOR_WORDS.has(w.toLowerCase()) || /^[^\p{L}]*[\p{Lu}\d]/u.test(w));
  const numbered = NUMBERED.exec(t);
  // A long numbered line in sentence case is a list step that happens to lack a full stop.
  if (numbered) return words.length <= 8 || titleCase ? numbered[1]!.split('.').length : null;
  if (!/^\p{Lu}/u.test(t)) return null;
  return caps || titleCase ? 0 : null;
}

function typicalLineLength(pages: string[][]): number {
  const lengths = pages.flat().map((l) => l.length).sort((a, b) => a - b);
  return lengths[Math.floor(lengths.length * 0.8)] ?? 0;
}

interface PendingHeading {
  block: Block;
  depth: number;
}

/**
 * Splits a paragraph's lines into prose and table-like runs: three or more consecutive short
 * lines none of which ends a sentence are rows of a table (or a similar grid), kept one per line.
 */
function proseAndRows(lines: string[], shortLimit: number, page: number): Block[] {
  const isRow = (l: string): boolean => l.length < shortLimit && !TERMINAL.test(l);
  const blocks: Block[] = [];
  let prose: string[] = [];
  let i = 0;
  while (i < lines.length) {
    let j = i;
    while (j < lines.length && isRow(lines[j]!)) j++;
    if (j - i >= 3) {
      if (prose.length > 0) blocks.push({ kind: 'paragraph', text: prose.join(' '), page });
      prose = [];
      blocks.push({ kind: 'table', text: lines.slice(i, j).join('\n'), page });
      i = j;
    } else {
      prose.push(...lines.slice(i, Math.max(j, i + 1)));
      i = Math.max(j, i + 1);
    }
  }
  if (prose.length > 0) blocks.push({ kind: 'paragraph', text: prose.join(' '), page });
  return blocks;
}

/** Blocks from per-page lines (running lines already removed). Every block carries its 1-based page. */
export function pagesToBlocks(pages: string[][]): Block[] {
  const shortLimit = typicalLineLength(pages) * SHORT_LINE_SHARE;
  const out: (Block | PendingHeading)[] = [];
  pages.forEach((rawLines, index) => {
    const page = index + 1;
    const lines = rejoinHyphenated(rawLines);
    let paragraph: string[] = [];
    let list: string[] = [];
    // A heading can only start after a sentence, a heading or the page top.
    let afterSentence = true;
    const flush = (): void => {
      out.push(...proseAndRows(paragraph, shortLimit, page));
      if (list.length > 0) out.push({ kind: 'list', text: list.join('\n'), page });
      paragraph = [];
      list = [];
    };
    lines.forEach((line, i) => {
      const endsSentence = TERMINAL.test(line);
      const depth = afterSentence && i + 1 < lines.length ? headingShape(line) : null;
      // An unnumbered heading must lead into prose or a numbered section; a capitalised line
      // followed by another short fragment is more likely a table's header row.
      const next = lines[i + 1] ?? '';
      const leadsIn = next.length >= shortLimit || TERMINAL.test(next) || NUMBERED.test(next) || BULLET.test(next);
      if (depth !== null && (depth > 0 || leadsIn)) {
        flush();
        out.push({ block: { kind: 'heading', text: line, page }, depth });
        afterSentence = true;
        return;
      }
      afterSentence = endsSentence;
      if (BULLET.test(line)) {
        if (paragraph.length > 0) flush();
        list.push(line);
        return;
      }
      const previous = i > 0 ? lines[i - 1]! : '';
      if (list.length > 0 && !TERMINAL.test(previous)) {
        // An item wrapped onto this line.
        list[list.length - 1] += ' ' + line;
        return;
      }
      if (list.length > 0) flush();
      paragraph.push(line);
      // Full lines wrap, short ones stop: a short line that ends a sentence ends the paragraph.
      if (endsSentence && line.length < shortLimit) flush();
    });
    flush();
  });
  return cleanBlocks(assignHeadingLevels(joinRunOns(out)));
}

/**
 * A paragraph cut by a page break: the last paragraph of a page ends mid-sentence and the first of the next
 * page starts in lower case. Kept apart, the second half reads as a sentence of its own ("or near the
 * overhead line."), so the two become one paragraph that records both pages.
 */
function joinRunOns(items: (Block | PendingHeading)[]): (Block | PendingHeading)[] {
  const out: (Block | PendingHeading)[] = [];
  for (const item of items) {
    const prev = out[out.length - 1];
    if (
      prev !== undefined &&
      !('depth' in prev) &&
      !('depth' in item) &&
      prev.kind === 'paragraph' &&
      item.kind === 'paragraph' &&
      prev.page !== undefined &&
      item.page === (prev.pageEnd ?? prev.page) + 1 &&
      !TERMINAL.test(prev.text) &&
      /^\p{Ll}/u.test(item.text)
    ) {
      out[out.length - 1] = { ...prev, text: `${prev.text} ${item.text}`, pageEnd: item.page };
      continue;
    }
    out.push(item);
  }
  return out;
}

// Without font sizes, levels come from shape: an unnumbered first heading on page 1 is the
// document title (level 1); numbered headings nest by their number depth beneath it.
function assignHeadingLevels(items: (Block | PendingHeading)[]): Block[] {
  const first = items.find((x): x is PendingHeading => 'depth' in x);
  const hasTitle = first !== undefined && first.depth === 0 && first.block.page === 1;
  return items.map((x) => {
    if (!('depth' in x)) return x;
    const offset = hasTitle ? 1 : 0;
    const level = x === first && hasTitle ? 1 : x.depth === 0 ? 1 + offset : x.depth + offset;
    return { ...x.block, level: Math.min(6, level) };
  });
}

function metadataFrom(info: Record<string, unknown>): Record<string, string> {
  const metadata: Record<string, string> = {};
  for (const key of ['Title', 'Author', 'Subject', 'Keywords', 'Language']) {
    const value = info[key];
    if (typeof value === 'string' && value.trim() !== '') metadata[key.toLowerCase()] = value.trim();
  }
  return metadata;
}

export async function loadPdf(
  bytes: Uint8Array,
  fileName: string,
  limits: PdfLimits = DEFAULT_PDF_LIMITS,
  now: () => number = () => performance.now(),
): Promise<LoadedDocument> {
  const { pages, info } = await extract(bytes, limits, now);
  if (pages.every((p) => p.trim() === '')) throw new Error(NO_TEXT_MESSAGE);
  const blocks = pagesToBlocks(removeRunningLines(pages.map((p) => p.split('\n'))));
  if (blocks.length === 0) throw new Error(NO_TEXT_MESSAGE);
  const metadata = metadataFrom(info);
  const heading = blocks.find((b) => b.kind === 'heading');
  const text = blocks.map((b) => b.text).join('\n');
  // A version often sits only in the running header ("Staff Handbook - Issue 4"), which is removed
  // from the blocks, so the raw first page is searched after the body text.
  return {
    format: 'pdf',
    title: metadata['title'] ?? heading?.text ?? titleFromFileName(fileName),
    blocks,
    pageCount: pages.length,
    effectiveDate: findEffectiveDate(text, metadata),
    metadata: withVersion(metadata, `${text}\n${pages[0] ?? ''}`),
  };
}
