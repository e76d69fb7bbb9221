import type { Block, NormalisedDocument, PageBreak, PlacedBlock } from '../types.js';

// Soft hyphens and byte-order marks are invisible in print but break exact-phrase matching
// and quote checks, so they go along with the C0/C1 controls.
const INVISIBLE = /[\u00AD\uFEFF]/g;
// \p{Cc} covers C0 and C1 controls; \n and \t are the only ones with meaning in our text.
const CONTROL = /[^\P{Cc}\n\t]/gu;
// Every Unicode space separator (NBSP, thin space, ideographic space...) reads as a plain space.
const SPACES = /[\t\p{Zs}]+/gu;

/** NFC, no control characters except \n, tabs and other spaces collapsed to one space, line ends trimmed. */
export function normaliseText(s: string): string {
  return s
    .replace(/\r\n?/g, '\n')
    .normalize('NFC')
    .replace(INVISIBLE, '')
    .replace(CONTROL, '')
    .replace(SPACES, ' ')
    .split('\n')
    .map((line) => line.trimEnd())
    .join('\n')
    .trim();
}

/** Loaders hand out blocks with normalised text and no empty blocks, as the Block type promises. */
export function cleanBlocks(blocks: Block[]): Block[] {
  return blocks.map((b) => withText(b, normaliseText)).filter((b) => b.text !== '');
}

/** The block with `rewrite` applied to its text, its page breaks moved to match. */
function withText<T extends Block>(block: T, rewrite: (s: string) => string): T {
  const text = rewrite(block.text);
  if (!block.pageBreaks || block.pageBreaks.length === 0) return { ...block, text };
  return { ...block, text, pageBreaks: moveBreaks(block.text, text, block.pageBreaks, rewrite) };
}

/**
 * Where each page break lands after `rewrite`: rewriting the text before a break gives the
 * rewritten text up to it (the rewrites here only drop, fold and trim characters), and the break
 * then sits on the next non-space character, the first one of the new page.
 */
function moveBreaks(before: string, after: string, breaks: PageBreak[], rewrite: (s: string) => string): PageBreak[] {
  const out: PageBreak[] = [];
  for (const b of breaks) {
    let at = Math.min(rewrite(before.slice(0, b.at)).length, after.length);
    while (at < after.length && /\s/.test(after[at]!)) at++;
    if (at <= 0 || at >= after.length) continue;
    const last = out[out.length - 1];
    if (last && last.at >= at) continue;
    out.push({ at, page: b.page });
  }
  return out;
}

/**
 * The text a block contributes to the document. Blank lines inside a block are folded so that
 * "\n\n" in the document text only ever separates blocks; headings are a single line because
 * they also serve as citation section labels.
 */
function blockText(block: Block): string {
  const text = normaliseText(block.text).replace(/\n(?: ?\n)+/g, '\n');
  return block.kind === 'heading' ? text.replace(/\n/g, ' ') : text;
}

function headingLevel(block: Block): number {
  const level = block.level ?? 1;
  return Math.min(6, Math.max(1, Math.trunc(level)));
}

/** Joins the normalised blocks with "\n\n", dropping empty ones, and records offsets and heading paths. */
export function buildNormalisedDocument(blocks: Block[]): NormalisedDocument {
  const placed: PlacedBlock[] = [];
  // Index i holds the current heading of level i + 1; a heading clears every deeper level.
  const open: (string | undefined)[] = [];
  let text = '';
  for (const block of blocks) {
    const { text: t, ...rest } = withText(block, (s) => blockText({ ...block, text: s }));
    if (t === '') continue;
    if (text !== '') text += '\n\n';
    const start = text.length;
    text += t;
    const out: PlacedBlock = { ...rest, text: t, start, end: text.length, headingPath: [] };
    if (block.kind === 'heading') {
      const level = headingLevel(block);
      open.length = level;
      open[level - 1] = t;
      out.level = level;
    }
    out.headingPath = open.filter((h): h is string => h !== undefined);
    placed.push(out);
  }
  return { text, blocks: placed };
}
