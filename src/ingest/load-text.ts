import type { Block, LoadedDocument } from '../types.js';
import { findEffectiveDate, withVersion } from './effective-date.js';
import { checkChars, DEFAULT_DOCUMENT_LIMITS, NO_DEADLINE, type Deadline, type DocumentLimits } from './budget.js';
import { cleanBlocks } from './normalise.js';

/**
 * Bytes to string for the text formats: a BOM decides (UTF-8, UTF-16 LE/BE); without one,
 * strict UTF-8, and bytes that are not valid UTF-8 are read as Latin-1 (the WHATWG
 * "latin1" label, i.e. windows-1252, which agrees with ISO-8859-1 on every printable byte).
 */
export function decodeText(bytes: Uint8Array): string {
  if (bytes[0] === 0xef && bytes[1] === 0xbb && bytes[2] === 0xbf) {
    return new TextDecoder('utf-8').decode(bytes.subarray(3));
  }
  if (bytes[0] === 0xff && bytes[1] === 0xfe) return new TextDecoder('utf-16le').decode(bytes.subarray(2));
  if (bytes[0] === 0xfe && bytes[1] === 0xff) return new TextDecoder('utf-16be').decode(bytes.subarray(2));
  try {
    return new TextDecoder('utf-8', { fatal: true }).decode(bytes);
  } catch {
    return new TextDecoder('latin1').decode(bytes);
  }
}

/** The file name without folders or extension, for documents that state no title. */
export function titleFromFileName(fileName: string): string {
  const base = fileName.split(/[\\/]/).pop() ?? fileName;
  const dot = base.lastIndexOf('.');
  return (dot > 0 ? base.slice(0, dot) : base).trim() || base;
}

/** A row of a leader table: a label, a run of dots or underscores, a value (the answer step reads rows by it too). */
export const LEADER_ROW = /\S\s*(?:\.{4,}|…{2,}|_{4,})\s*\S/;
const UNDERLINE_1 = /^\s*={3,}\s*$/;
const UNDERLINE_2 = /^\s*-{3,}\s*$/;
const NUMBERED_HEADING = /^(\d{1,3}(?:\.\d{1,3})*)\.?\s+(\S.*)$/u;
const BULLET = /^\s*(?:[-*•‣◦–]|\d{1,3}[.)]|\([a-z0-9]{1,3}\)|[a-z][.)])\s+\S/u;
const TABLE_SEPARATOR = /^\s*\|?\s*:?-{2,}:?\s*(?:\|\s*:?-{2,}:?\s*)*\|?\s*$/;

function isShortLine(line: string): boolean {
  const t = line.trim();
  return t.length > 0 && t.length <= 80 && t.split(/\s+/).length <= 12;
}

function endsLikeSentence(line: string): boolean {
  return /[.,;:!?]["')\]]?$/.test(line.trim());
}

/** Level of a numbered heading line ("2.1 Eligibility" → 2), or 0 when the line is not one. */
export function numberedHeadingLevel(line: string): number {
  const m = NUMBERED_HEADING.exec(line.trim());
  if (!m || !isShortLine(line) || endsLikeSentence(line)) return 0;
  if (!/^\p{Lu}/u.test(m[2]!)) return 0;
  return Math.min(6, m[1]!.split('.').length);
}

/** ALL-CAPS short lines ("LOST PROPERTY") read as headings in plain text. */
function isCapsHeading(line: string): boolean {
  const t = line.trim();
  return isShortLine(t) && (t.match(/\p{Lu}/gu)?.length ?? 0) >= 3 && !/\p{Ll}/u.test(t) && !/[.,;]$/.test(t);
}

function tableRow(line: string): string {
  return line
    .trim()
    .replace(/^\|/, '')
    .replace(/\|$/, '')
    .split('|')
    .map((c) => c.trim())
    .join(' | ');
}

function groupToBlocks(lines: string[], isLastGroup: boolean): Block[] {
  const blocks: Block[] = [];
  let rest = lines;
  // A heading may sit alone or lead a group; either way it needs something after it.
  while (rest.length > 0) {
    const first = rest[0]!;
    const second = rest[1];
    if (second !== undefined && UNDERLINE_1.test(second)) {
      blocks.push({ kind: 'heading', level: 1, text: first.trim() });
      rest = rest.slice(2);
      continue;
    }
    if (second !== undefined && UNDERLINE_2.test(second) && first.trim() !== '') {
      blocks.push({ kind: 'heading', level: 2, text: first.trim() });
      rest = rest.slice(2);
      continue;
    }
    const hasFollower = rest.length > 1 || !isLastGroup;
    const numbered = numberedHeadingLevel(first);
    const followerIsNumbered = second !== undefined && NUMBERED_HEADING.test(second.trim());
    if (hasFollower && numbered > 0 && !followerIsNumbered) {
      blocks.push({ kind: 'heading', level: numbered, text: first.trim() });
      rest = rest.slice(1);
      continue;
    }
    if (hasFollower && isCapsHeading(first)) {
      blocks.push({ kind: 'heading', level: 1, text: first.trim() });
      rest = rest.slice(1);
      continue;
    }
    break;
  }
  if (rest.length === 0) return blocks;
  if (rest.every((l) => l.includes('|'))) {
    blocks.push({ kind: 'table', text: rest.filter((l) => !TABLE_SEPARATOR.test(l)).map(tableRow).join('\n') });
  } else if (rest.length > 1 && rest.filter((l) => LEADER_ROW.test(l)).length * 2 >= rest.length) {
    // A leader table ("Opening hours ........ 9:00-17:00"): each line is a row, never reflowed.
    blocks.push({ kind: 'table', text: rest.map((l) => l.trim()).join('\n') });
  } else if (BULLET.test(rest[0]!)) {
    // Continuation lines of a wrapped item join the item they continue.
    const items: string[] = [];
    for (const line of rest) {
      if (BULLET.test(line) || items.length === 0) items.push(line.trim());
      else items[items.length - 1] += ' ' + line.trim();
    }
    blocks.push({ kind: 'list', text: items.join('\n') });
  } else if (rest.every((l) => /^(?: {4}|\t)/.test(l))) {
    blocks.push({ kind: 'code', text: rest.map((l) => l.replace(/^(?: {4}|\t)/, '')).join('\n') });
  } else {
    // Plain text is usually hard-wrapped; the paragraph is one logical line.
    blocks.push({ kind: 'paragraph', text: rest.map((l) => l.trim()).join(' ') });
  }
  return blocks;
}

/** Blocks of a plain-text document: blank-line paragraphs, underlined, numbered and ALL-CAPS headings. */
export function parseTextBlocks(text: string, deadline: Deadline = NO_DEADLINE): Block[] {
  const groups: string[][] = [];
  let current: string[] = [];
  let lines = 0;
  for (const line of text.replace(/\r\n?/g, '\n').split('\n')) {
    if (++lines % 4096 === 0) deadline.check('reading lines of text');
    if (line.trim() === '') {
      if (current.length > 0) groups.push(current);
      current = [];
    } else {
      current.push(line.replace(/\s+$/, ''));
    }
  }
  if (current.length > 0) groups.push(current);
  deadline.check('reading lines of text');
  return cleanBlocks(groups.flatMap((g, i) => groupToBlocks(g, i === groups.length - 1)));
}

export function loadText(
  bytes: Uint8Array,
  fileName: string,
  limits: DocumentLimits = DEFAULT_DOCUMENT_LIMITS,
  deadline: Deadline = NO_DEADLINE,
): LoadedDocument {
  // Every character takes at most 3 bytes (UTF-8 within the Basic Multilingual Plane; 4 bytes outside it
  // make 2 characters, UTF-16 makes 1 of 2 bytes): a file longer than 3 bytes a character over the limit
  // holds too many characters whatever it decodes to, so it is refused before it is decoded.
  const atLeast = Math.floor(Math.max(0, bytes.length - 3) / 3);
  if (atLeast > limits.maxChars) checkChars(atLeast, limits, 'the document has at least');
  const text = decodeText(bytes);
  // Checked before the text is split into lines and blocks, the work it bounds.
  checkChars(text.length, limits);
  const blocks = parseTextBlocks(text, deadline);
  return unpagedDocument('text', fileName, blocks, blocks.find((b) => b.kind === 'heading')?.text, {}, text);
}

/**
 * A document without pages, from its blocks: titled by the given heading (else by its file name), with the
 * effective date and stated version found in its text.
 */
export function unpagedDocument(
  format: LoadedDocument['format'],
  fileName: string,
  blocks: LoadedDocument['blocks'],
  heading: string | undefined,
  metadata: Record<string, string>,
  text: string,
): LoadedDocument {
  return {
    format,
    title: heading ?? titleFromFileName(fileName),
    blocks,
    pageCount: null,
    effectiveDate: findEffectiveDate(text, {}),
    metadata: withVersion(metadata, text),
  };
}
