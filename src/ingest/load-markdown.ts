import type { Block, LoadedDocument } from '../types.js';
import { checkChars, DEFAULT_DOCUMENT_LIMITS, type DocumentLimits } from './budget.js';
import { findEffectiveDate, withVersion } from './effective-date.js';
import { decodeText, titleFromFileName } from './load-text.js';
import { cleanBlocks } from './normalise.js';

const ATX = /^ {0,3}(#{1,6})(?:[ \t]+(.*?))?(?:[ \t]+#+)?[ \t]*$/;
const SETEXT_1 = /^ {0,3}=+[ \t]*$/;
const SETEXT_2 = /^ {0,3}-+[ \t]*$/;
const THEMATIC = /^ {0,3}([-*_])(?:[ \t]*\1){2,}[ \t]*$/;
const FENCE = /^ {0,3}(`{3,}|~{3,})/;
const LIST_ITEM = /^(\s*)([-*+]|\d{1,9}[.)])[ \t]+(.*)$/;
const TABLE_SEPARATOR = /^\s*\|?\s*:?-+:?\s*(?:\|\s*:?-+:?\s*)*\|?\s*$/;
const LINK_DEFINITION = /^ {0,3}\[[^\]]+\]:\s*\S+/;

/** Splits YAML-like front matter (`---` / key: value / `---`) from the body. */
export function splitFrontMatter(source: string): { metadata: Record<string, string>; body: string } {
  const m = /^---[ \t]*\n([\s\S]*?)\n(?:---|\.\.\.)[ \t]*(?:\n|$)/.exec(source);
  if (!m) return { metadata: {}, body: source };
  const metadata: Record<string, string> = {};
  for (const line of m[1]!.split('\n')) {
    const kv = /^([A-Za-z0-9_-]+)\s*:\s*(.*)$/.exec(line);
    if (!kv) continue;
    metadata[kv[1]!.toLowerCase()] = kv[2]!.trim().replace(/^(["'])(.*)\1$/, '$2');
  }
  return { metadata, body: source.slice(m[0].length) };
}

/** Removes inline markup that would otherwise show up inside quoted passages. */
export function stripInline(s: string): string {
  return (
    s
      .replace(/!\[[^\]]*\]\([^)]*\)/g, '')
      .replace(/!\[[^\]]*\]\[[^\]]*\]/g, '')
      .replace(/\[([^\]]*)\]\([^)]*\)/g, '$1')
      .replace(/\[([^\]]*)\]\[[^\]]*\]/g, '$1')
      .replace(/<((?:https?|mailto):[^>\s]+)>/g, '$1')
      .replace(/<\/?[A-Za-z][^>]*>/g, '')
      .replace(/`+/g, '')
      .replace(/(\*\*|__|~~)/g, '')
      // Single * and _ only when they hug a word from outside, so snake_case and 3 * 4 survive.
      .replace(/(^|[\s(["'])[*_](?=\S)/g, '$1')
      .replace(/(\S)[*_](?=$|[\s)\]"'.,;:!?])/g, '$1')
      .replace(/\\([\\`*_{}[\]()#+\-.!|~<>])/g, '$1')
  );
}

function splitRow(line: string): string[] {
  const cells = line.trim().replace(/^\|/, '').replace(/(?<!\\)\|$/, '').split(/(?<!\\)\|/);
  return cells.map((c) => stripInline(c.trim().replace(/\\\|/g, '|')));
}

/** Blocks of a Markdown body (front matter already removed). */
export function parseMarkdownBlocks(body: string): Block[] {
  const lines = body.replace(/\r\n?/g, '\n').split('\n');
  const blocks: Block[] = [];
  let paragraph: string[] = [];
  let list: string[] = [];

  const flushParagraph = (): void => {
    if (paragraph.length > 0) blocks.push({ kind: 'paragraph', text: stripInline(paragraph.join(' ')) });
    paragraph = [];
  };
  const flushList = (): void => {
    if (list.length > 0) blocks.push({ kind: 'list', text: list.join('\n') });
    list = [];
  };
  const flush = (): void => {
    flushParagraph();
    flushList();
  };

  for (let i = 0; i < lines.length; i++) {
    const line = lines[i]!;
    const fence = FENCE.exec(line);
    if (fence) {
      flush();
      const marker = fence[1]!;
      const code: string[] = [];
      i++;
      while (i < lines.length && !lines[i]!.trimStart().startsWith(marker)) code.push(lines[i++]!);
      blocks.push({ kind: 'code', text: code.join('\n') });
      continue;
    }
    if (line.trim() === '') {
      // Blank lines between items of the same kind keep a "loose" list together.
      const after = lines.slice(i + 1).find((l) => l.trim() !== '');
      const nextItem = after === undefined ? null : LIST_ITEM.exec(after);
      const lastOrdered = /^\s*\d/.test(list[list.length - 1] ?? '');
      if (list.length > 0 && nextItem && /^\d/.test(nextItem[2]!) === lastOrdered) continue;
      flush();
      continue;
    }
    if (/^\s*<!--.*-->\s*$/.test(line) || LINK_DEFINITION.test(line)) continue;
    const atx = ATX.exec(line);
    if (atx) {
      flush();
      blocks.push({ kind: 'heading', level: atx[1]!.length, text: stripInline(atx[2] ?? '') });
      continue;
    }
    if (paragraph.length > 0 && (SETEXT_1.test(line) || SETEXT_2.test(line))) {
      const text = stripInline(paragraph.join(' '));
      paragraph = [];
      blocks.push({ kind: 'heading', level: SETEXT_1.test(line) ? 1 : 2, text });
      continue;
    }
    if (THEMATIC.test(line)) {
      flush();
      continue;
    }
    const next = lines[i + 1];
    if (line.includes('|') && next !== undefined && next.includes('-') && TABLE_SEPARATOR.test(next)) {
      flush();
      const rows = [splitRow(line).join(' | ')];
      i += 2;
      while (i < lines.length && lines[i]!.includes('|') && lines[i]!.trim() !== '') {
        rows.push(splitRow(lines[i]!).join(' | '));
        i++;
      }
      i--;
      blocks.push({ kind: 'table', text: rows.join('\n') });
      continue;
    }
    const item = LIST_ITEM.exec(line);
    if (item && (paragraph.length === 0 || list.length > 0 || /^[-*+]$/.test(item[2]!))) {
      flushParagraph();
      const marker = /^\d/.test(item[2]!) ? item[2]!.replace(')', '.') : '-';
      const indent = item[1]!.replace(/\t/g, '    ').length >= 2 ? '  ' : '';
      list.push(`${indent}${marker} ${stripInline(item[3]!)}`);
      continue;
    }
    if (list.length > 0) {
      // Indented or lazy continuation of the last list item.
      list[list.length - 1] += ' ' + stripInline(line.trim());
      continue;
    }
    paragraph.push(line.trim().replace(/^>\s?/, ''));
  }
  flush();
  return cleanBlocks(blocks);
}

export function loadMarkdown(bytes: Uint8Array, fileName: string, limits: DocumentLimits = DEFAULT_DOCUMENT_LIMITS): LoadedDocument {
  const decoded = decodeText(bytes);
  // Markdown's text is nearly all of its source: the source's length is checked before it is parsed.
  checkChars(decoded.length, limits);
  const source = decoded.replace(/\r\n?/g, '\n');
  const { metadata, body } = splitFrontMatter(source);
  const blocks = parseMarkdownBlocks(body);
  const h1 = blocks.find((b) => b.kind === 'heading' && b.level === 1);
  const text = blocks.map((b) => b.text).join('\n');
  return {
    format: 'markdown',
    title: metadata['title'] || h1?.text || titleFromFileName(fileName),
    blocks,
    pageCount: null,
    effectiveDate: findEffectiveDate(text, metadata),
    metadata: withVersion(metadata, text),
  };
}
