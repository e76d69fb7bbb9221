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
 * Drops running headers and footers: lines at a page edge that recur at that same edge (digits
 * ignored, so "Page 2 of 5" matches "Page 3 of 5") on at least half the pages, plus bare page
 * numbers. Top and bottom are counted apart: a footer that repeats the document's title must not
 * take the title printed at the top of the first page with it.
 */
export function removeRunningLines(pages: string[][]): string[][] {
  const trimmed = pages.map((lines) => lines.map((l) => l.replace(/\s+/g, ' ').trim()).filter((l) => l !== ''));
  const repeatedAt = (edgeOf: (lines: string[]) => string[]): Set<string> => {
    const repeated = new Set<string>();
    if (trimmed.length < 2) return repeated;
    const seen = new Map<string, number>();
    for (const lines of trimmed) {
      for (const key of new Set(edgeOf(lines).map(edgeKey))) seen.set(key, (seen.get(key) ?? 0) + 1);
    }
    const needed = Math.max(2, Math.ceil(trimmed.length / 2));
    for (const [key, count] of seen) if (count >= needed) repeated.add(key);
    return repeated;
  };
  // On a short page the two edges would overlap; each takes its own half.
  const topSize = (lines: string[]): number => Math.min(EDGE_LINES, Math.floor(lines.length / 2));
  const bottomSize = (lines: string[]): number => Math.min(EDGE_LINES, lines.length - topSize(lines));
  const top = repeatedAt((lines) => lines.slice(0, topSize(lines)));
  const bottom = repeatedAt((lines) => lines.slice(lines.length - bottomSize(lines)));
  const running = (line: string, repeated: Set<string>): boolean => repeated.has(edgeKey(line)) || PAGE_NUMBER.test(line);
  return trimmed.map((lines) => {
    let start = 0;
    let end = lines.length;
    while (start < topSize(lines) && running(lines[start]!, top)) start++;
    while (end > start && lines.length - end < bottomSize(lines) && running(lines[end - 1]!, bottom)) end--;
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

// A line ending in one of these words breaks off mid-phrase: it is wrapped text, not a heading.
const OPEN_ENDING = new Set([
  ...MINOR_WORDS,
  'nor', 'but', 'is', 'are', 'was', 'were', 'be', 'been', 'that', 'which', 'who', 'whose', 'than', 'if',
  'your', 'our', 'their', 'its', 'this', 'these', 'those', 'not', 'no', 'will', 'may', 'must', 'can',
]);

/**
 * A short label in sentence case ("Opening hours", "How keys are returned"): the
 * sub-heading style of many policy documents, which title-case and numbering rules miss. Only the
 * shape is judged here; pagesToBlocks also asks that it stands alone between a finished sentence
 * and the prose it introduces, which a table row, an address line or a wrapped line does not.
 */
export function isLabelLine(line: string, maxLength: number): boolean {
  const t = line.trim();
  if (t.length === 0 || t.length >= maxLength || !/^\p{Lu}/u.test(t)) return false;
  // Punctuation inside or at the end marks a sentence or a list of values, not a label; a question is allowed.
  if (/[.,;:!·|]/u.test(t)) return false;
  const words = t.replace(/\?$/, '').split(/\s+/);
  if (words.length > 8 || !words.every((w) => /[\p{L}\d&–-]/u.test(w))) return false;
  return !OPEN_ENDING.has(words[words.length - 1]!.toLowerCase());
}

function typicalLineLength(pages: string[][]): number {
  const lengths = pages.flat().map((l) => l.length).sort((a, b) => a - b);
  return lengths[Math.floor(lengths.length * 0.8)] ?? 0;
}

interface PendingHeading {
  block: Block;
  depth: number;
  /** A sentence-case label: the sub-heading style, so it nests under the numbered section it sits in. */
  label?: true;
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
  const allLines = pages.map((p) => rejoinHyphenated(p));
  const numbers = sectionNumbers(allLines);
  allLines.forEach((lines, index) => {
    const page = index + 1;
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
      const last = i + 1 >= lines.length;
      // An unnumbered heading must lead into prose or a numbered section; a capitalised line
      // followed by another short fragment is more likely a table's header row.
      const next = lines[i + 1] ?? '';
      const leadsIn = next.length >= shortLimit || TERMINAL.test(next) || NUMBERED.test(next) || BULLET.test(next);
      let depth = afterSentence && !last ? headingShape(line) : null;
      let label = false;
      // A sentence-case label needs the same setting, and the prose after it must start a sentence.
      if (depth === null && afterSentence && !last && leadsIn && /^[\p{Lu}\d•‣◦▪●■–-]/u.test(next) && isLabelLine(line, shortLimit)) {
        depth = 0;
        label = true;
      }
      // A numbered heading after an unfinished line (a date or owner line under the title, a table's
      // last row) still counts when the document numbers its sections in sequence around it.
      if (depth === null && !afterSentence && !last && leadsIn) depth = inSequence(line, numbers);
      if (depth !== null && (depth > 0 || leadsIn)) {
        flush();
        out.push({ block: { kind: 'heading', text: line, page }, depth, ...(label ? { label: true as const } : {}) });
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
 * Numbers ("3", "4.2") of the lines shaped like numbered headings that stand where a heading can:
 * at a page top, or after a line that ends a sentence.
 */
function sectionNumbers(pages: string[][]): Set<string> {
  const out = new Set<string>();
  for (const lines of pages) {
    lines.forEach((line, i) => {
      const number = NUMBERED.exec(line.trim())?.[1];
      if (number === undefined || !(headingShape(line) ?? 0)) return;
      if (i === 0 || TERMINAL.test(lines[i - 1]!)) out.add(number);
    });
  }
  return out;
}

/** The depth of a numbered heading whose neighbour in the numbering (the next or the previous section) is a heading. */
function inSequence(line: string, numbers: ReadonlySet<string>): number | null {
  const depth = headingShape(line);
  const number = NUMBERED.exec(line.trim())?.[1];
  if (!depth || number === undefined) return null;
  const parts = number.split('.').map(Number);
  const lastPart = parts[parts.length - 1]!;
  const sibling = (k: number): string => [...parts.slice(0, -1), k].join('.');
  return numbers.has(sibling(lastPart + 1)) || (lastPart > 1 && numbers.has(sibling(lastPart - 1))) ? depth : null;
}

/**
 * A paragraph cut by a page break: the last paragraph of a page ends mid-sentence and the first of the next
 * page starts in lower case. Kept apart, the second half reads as a sentence of its own ("or near the
 * overhead line."), so the two become one paragraph that records both pages and where the second begins.
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
      // The page break is kept as an offset, so a quote from the second half is cited on its own page.
      const pageBreaks = [...(prev.pageBreaks ?? []), { at: prev.text.length + 1, page: item.page }];
      out[out.length - 1] = { ...prev, text: `${prev.text} ${item.text}`, pageEnd: item.page, pageBreaks };
      continue;
    }
    out.push(item);
  }
  return out;
}

// pdf-parse's text gives no font sizes, so levels come from shape: an unnumbered first heading on
// page 1 is the document title (level 1); numbered headings nest by their number depth beneath it;
// a sentence-case label nests one level below the numbered heading before it. Unnumbered Title Case
// or capitals headings keep the top level: they are as often part titles as sub-headings.
function assignHeadingLevels(items: (Block | PendingHeading)[]): Block[] {
  const first = items.find((x): x is PendingHeading => 'depth' in x);
  const hasTitle = first !== undefined && first.depth === 0 && first.block.page === 1;
  const offset = hasTitle ? 1 : 0;
  let numbered = 0;
  return items.map((x) => {
    if (!('depth' in x)) return x;
    let level: number;
    if (x === first && hasTitle) level = 1;
    else if (x.depth > 0) level = x.depth + offset;
    else if (x.label && numbered > 0) level = numbered + offset + 1;
    else level = 1 + offset;
    if (x.depth > 0) numbered = x.depth;
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
