import { DomHandler, DomUtils, Parser, type parseDocument } from 'htmlparser2';
import type { Block, LoadedDocument } from '../types.js';
import { checkChars, DEFAULT_DOCUMENT_LIMITS, LimitExceeded, type DocumentLimits } from './budget.js';
import { findEffectiveDate, withVersion } from './effective-date.js';
import { decodeText, titleFromFileName } from './load-text.js';
import { cleanBlocks } from './normalise.js';

type HtmlDocument = ReturnType<typeof parseDocument>;
type Node = HtmlDocument['children'][number];
type Element = Parameters<typeof DomUtils.getAttributeValue>[0];

// Page furniture and non-content: none of it should ever be quoted back as policy text.
const DROPPED = new Set([
  'script', 'style', 'nav', 'aside', 'noscript', 'template', 'form', 'svg', 'iframe', 'object',
  'canvas', 'button', 'select', 'head', 'img', 'video', 'audio', 'map',
]);
// A site-wide header or footer is furniture; one inside an article or section introduces or
// closes that content (often holding its h1), so it stays.
const SECTIONING = new Set(['main', 'article', 'section']);
const CONTAINERS = new Set([
  'html', 'body', 'div', 'section', 'article', 'main', 'blockquote', 'figure', 'figcaption', 'details',
  'summary', 'address', 'center', 'fieldset', 'li', 'dd', 'dt', 'header', 'footer', 'hgroup', 'search',
]);

function isHidden(el: Element): boolean {
  const attrs = el.attribs;
  if ('hidden' in attrs) return true;
  if ((attrs['aria-hidden'] ?? '').toLowerCase() === 'true') return true;
  return /display\s*:\s*none|visibility\s*:\s*hidden/i.test(attrs['style'] ?? '');
}

function isDropped(el: Element, inContent: boolean): boolean {
  if (DROPPED.has(el.name) || isHidden(el)) return true;
  return (el.name === 'header' || el.name === 'footer') && !inContent;
}

/** Inline text of a node: whitespace collapsed as a browser would, <br> kept as a line break. */
function inlineText(node: Node, inContent: boolean): string {
  const parts: string[] = [];
  const visit = (n: Node): void => {
    if (DomUtils.isText(n)) parts.push(n.data.replace(/[ \t\n\r\f]+/g, ' '));
    else if (DomUtils.isTag(n)) {
      if (isDropped(n, inContent)) return;
      if (n.name === 'br') parts.push('\n');
      else n.children.forEach(visit);
    } else if (DomUtils.isCDATA(n)) n.children.forEach(visit);
  };
  visit(node);
  return tidyLines(parts.join(''));
}

function tidyLines(s: string): string {
  return s
    .split('\n')
    .map((l) => l.replace(/ {2,}/g, ' ').trim())
    .filter((l) => l !== '')
    .join('\n');
}

function listLines(list: Element, depth: number, inContent: boolean): string[] {
  const lines: string[] = [];
  let n = Number(list.attribs['start'] ?? '1');
  if (!Number.isFinite(n)) n = 1;
  for (const child of list.children) {
    if (!DomUtils.isTag(child) || isDropped(child, inContent)) continue;
    if (child.name === 'ul' || child.name === 'ol') {
      lines.push(...listLines(child, depth + 1, inContent));
      continue;
    }
    if (child.name !== 'li') continue;
    const nested = child.children.filter(
      (c): c is Element => DomUtils.isTag(c) && (c.name === 'ul' || c.name === 'ol'),
    );
    const own = child.children.filter((c) => !nested.includes(c as Element));
    const text = own.map((c) => inlineText(c, inContent)).join(' ').replace(/\s*\n\s*/g, ' ').trim();
    const marker = list.name === 'ol' ? `${n++}.` : '-';
    if (text !== '') lines.push(`${'  '.repeat(depth)}${marker} ${text}`);
    for (const sub of nested) lines.push(...listLines(sub, depth + 1, inContent));
  }
  return lines;
}

function tableRows(table: Element, inContent: boolean): string[] {
  const rows: string[] = [];
  const visit = (n: Node): void => {
    if (!DomUtils.isTag(n) || isDropped(n, inContent)) return;
    if (n.name === 'table' && n !== table) return;
    if (n.name === 'tr') {
      const cells = n.children
        .filter((c): c is Element => DomUtils.isTag(c) && (c.name === 'td' || c.name === 'th'))
        .map((c) => inlineText(c, inContent).replace(/\n/g, ' '));
      if (cells.some((c) => c !== '')) rows.push(cells.join(' | '));
      return;
    }
    n.children.forEach(visit);
  };
  table.children.forEach(visit);
  return rows;
}

function collectBlocks(roots: Node[], startInContent: boolean): Block[] {
  const blocks: Block[] = [];
  let inline: string[] = [];
  const flush = (): void => {
    const text = tidyLines(inline.join(''));
    if (text !== '') blocks.push({ kind: 'paragraph', text });
    inline = [];
  };

  const walk = (node: Node, inContent: boolean): void => {
    if (DomUtils.isText(node)) {
      inline.push(node.data.replace(/[ \t\n\r\f]+/g, ' '));
      return;
    }
    if (DomUtils.isCDATA(node)) {
      node.children.forEach((c) => walk(c, inContent));
      return;
    }
    if (!DomUtils.isTag(node) || isDropped(node, inContent)) return;
    const el = node;
    const heading = /^h([1-6])$/.exec(el.name);
    if (heading) {
      flush();
      blocks.push({ kind: 'heading', level: Number(heading[1]), text: inlineText(el, inContent).replace(/\n/g, ' ') });
    } else if (el.name === 'p') {
      flush();
      blocks.push({ kind: 'paragraph', text: inlineText(el, inContent) });
    } else if (el.name === 'ul' || el.name === 'ol') {
      flush();
      blocks.push({ kind: 'list', text: listLines(el, 0, inContent).join('\n') });
    } else if (el.name === 'dl') {
      flush();
      const lines = el.children
        .filter((c): c is Element => DomUtils.isTag(c) && (c.name === 'dt' || c.name === 'dd'))
        .map((c) => `${c.name === 'dt' ? '-' : ' '} ${inlineText(c, inContent).replace(/\n/g, ' ')}`);
      blocks.push({ kind: 'list', text: lines.join('\n') });
    } else if (el.name === 'table') {
      flush();
      const caption = el.children.find((c): c is Element => DomUtils.isTag(c) && c.name === 'caption');
      if (caption) blocks.push({ kind: 'paragraph', text: inlineText(caption, inContent) });
      blocks.push({ kind: 'table', text: tableRows(el, inContent).join('\n') });
    } else if (el.name === 'pre') {
      flush();
      blocks.push({ kind: 'code', text: DomUtils.textContent(el).replace(/^\n/, '').trimEnd() });
    } else if (el.name === 'br') {
      inline.push('\n');
    } else if (el.name === 'hr') {
      flush();
    } else if (CONTAINERS.has(el.name)) {
      flush();
      const childInContent = inContent || SECTIONING.has(el.name);
      el.children.forEach((c) => walk(c, childInContent));
      flush();
    } else {
      el.children.forEach((c) => walk(c, inContent));
    }
  };
  for (const root of roots) walk(root, startInContent);
  flush();
  return cleanBlocks(blocks);
}

function hasAncestor(el: Element, name: string): boolean {
  for (let p = el.parent; p; p = p.parent) if (DomUtils.isTag(p) && p.name === name) return true;
  return false;
}

function contentRoots(doc: HtmlDocument): { roots: Node[]; inContent: boolean } {
  const visible = (el: Element): boolean => !isHidden(el);
  const main = DomUtils.findOne((el) => el.name === 'main' && visible(el), doc.children);
  if (main) return { roots: [main], inContent: true };
  const articles = DomUtils.findAll((el) => el.name === 'article' && visible(el), doc.children).filter(
    (a) => !hasAncestor(a, 'article'),
  );
  if (articles.length > 0) return { roots: articles, inContent: true };
  const body = DomUtils.findOne((el) => el.name === 'body', doc.children);
  return { roots: body ? [body] : doc.children, inContent: false };
}

function readMetadata(doc: HtmlDocument): Record<string, string> {
  const metadata: Record<string, string> = {};
  for (const meta of DomUtils.findAll((el) => el.name === 'meta', doc.children)) {
    const key = meta.attribs['name'] ?? meta.attribs['property'];
    const content = meta.attribs['content'];
    if (key && content !== undefined) metadata[key.toLowerCase()] = content.trim();
  }
  const html = DomUtils.findOne((el) => el.name === 'html', doc.children);
  const lang = html?.attribs['lang'];
  if (lang) metadata['lang'] = lang;
  return metadata;
}

/**
 * The DOM builder, refusing to nest deeper than `maxDepth` elements. The walks over the tree recurse, so a page
 * nested 200,000 deep would overflow the stack after many seconds of work; the parser itself keeps its open
 * elements in a list, so the depth is known the moment an element opens, before the tree grows any deeper.
 */
class DepthBoundHandler extends DomHandler {
  constructor(private readonly maxDepth: number) {
    super(undefined, {});
  }

  override onopentag(name: string, attribs: { [key: string]: string }): void {
    // tagStack holds the document root and then each open element.
    if (this.tagStack.length > this.maxDepth) {
      throw new LimitExceeded(
        'htmlMaxDepth',
        `the HTML nests elements more than ${this.maxDepth} deep (limits.htmlMaxDepth)`,
      );
    }
    super.onopentag(name, attribs);
  }
}

function parseBounded(source: string, maxDepth: number): HtmlDocument {
  const handler = new DepthBoundHandler(maxDepth);
  new Parser(handler).end(source);
  return handler.root;
}

/** Blocks, metadata and title of an HTML string (also the last step of the DOCX loader). */
export function parseHtml(
  source: string,
  limits: Pick<DocumentLimits, 'htmlMaxDepth'> = DEFAULT_DOCUMENT_LIMITS,
): { blocks: Block[]; metadata: Record<string, string>; title: string } {
  const doc = parseBounded(source, limits.htmlMaxDepth);
  const { roots, inContent } = contentRoots(doc);
  const blocks = collectBlocks(roots, inContent);
  const metadata = readMetadata(doc);
  const titleEl = DomUtils.findOne((el) => el.name === 'title', doc.children);
  const title = titleEl ? DomUtils.textContent(titleEl).replace(/\s+/g, ' ').trim() : '';
  return { blocks, metadata, title };
}

export function loadHtml(bytes: Uint8Array, fileName: string, limits: DocumentLimits = DEFAULT_DOCUMENT_LIMITS): LoadedDocument {
  const { blocks, metadata, title } = parseHtml(decodeText(bytes), limits);
  const h1 = blocks.find((b) => b.kind === 'heading' && b.level === 1);
  const text = blocks.map((b) => b.text).join('\n');
  checkChars(text.length, limits);
  return {
    format: 'html',
    title: title || h1?.text || titleFromFileName(fileName),
    blocks,
    pageCount: null,
    effectiveDate: findEffectiveDate(text, metadata),
    metadata: withVersion(metadata, text),
  };
}
