// How one context source is written into the prompt. Shared by the context builder (which
// must count exactly these tokens against the budget) and the prompt builder.

import type { ContextSource } from './types.js';

type Renderable = Pick<ContextSource, 'n' | 'title' | 'page' | 'pageEnd' | 'section' | 'effectiveDate' | 'text'>;

/** One fenced source block: `<source n="1" title="..." page="3">text</source>`. */
export function renderSource(s: Renderable): string {
  const attrs = [`n="${s.n}"`, `title="${attr(s.title)}"`];
  if (s.page !== null) {
    attrs.push(`page="${s.pageEnd !== null && s.pageEnd !== s.page ? `${s.page}-${s.pageEnd}` : s.page}"`);
  }
  if (s.section) attrs.push(`section="${attr(s.section)}"`);
  if (s.effectiveDate) attrs.push(`effective="${attr(s.effectiveDate)}"`);
  return `<source ${attrs.join(' ')}>\n${neutraliseFences(s.text)}\n</source>`;
}

/**
 * Document text is data, and a document could contain text that looks like our fence.
 * Breaking any "<source" / "</source" with a space keeps a passage from closing its own
 * block early or opening a forged one.
 */
export function neutraliseFences(text: string): string {
  return text.replace(/<(\s*\/?\s*)(source)/gi, '< $1$2');
}

function attr(value: string): string {
  return value.replace(/&/g, '&amp;').replace(/"/g, '&quot;').replace(/</g, '&lt;').replace(/\s+/g, ' ');
}
