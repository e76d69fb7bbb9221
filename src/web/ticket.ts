// "Copy for a ticket": the answer as plain text a member of staff pastes into a reply, its citation
// markers renumbered 1, 2, 3 ... in order of first use, numbered footnotes naming each source, and the
// caution that comes with every answer, so it travels with the answer wherever it is pasted.

import type { AnswerDone, Citation } from './types.js';

const MARKER = /\[(\d+(?:\s*,\s*\d+)*)\]/g;

/** The heading path without a leading repeat of the document title. */
export function sectionLabel(title: string, section: string): string {
  const parts = section.split(' > ').map((p) => p.trim()).filter(Boolean);
  if (parts[0] === title.trim()) parts.shift();
  return parts.join(' > ');
}

export function footnote(i: number, c: Pick<Citation, 'title' | 'section' | 'page' | 'effectiveDate'>): string {
  const bits = [c.title];
  const section = sectionLabel(c.title, c.section);
  if (section) bits.push(`section "${section}"`);
  if (c.page !== null) bits.push(`page ${c.page}`);
  if (c.effectiveDate) bits.push(`effective ${c.effectiveDate}`);
  return `[${i}] ${bits.join(', ')}`;
}

export function ticketText(a: Pick<AnswerDone, 'answer' | 'abstained' | 'citations' | 'caution'>): string {
  // An abstention states that there is nothing to act on; it is copied as its plain sentence.
  if (a.abstained) return a.answer.trim();
  const caution = a.caution.trim();
  const byN = new Map(a.citations.map((c) => [c.n, c]));
  const order: number[] = [];
  const body = a.answer.trim().replace(MARKER, (whole, list: string) => {
    const nums = list.split(',').map((s) => Number(s.trim()));
    // A marker naming no known citation is not a reference (the service removes those anyway).
    if (!nums.every((n) => byN.has(n))) return whole;
    const renumbered = nums.map((n) => {
      if (!order.includes(n)) order.push(n);
      return order.indexOf(n) + 1;
    });
    return `[${renumbered.join(', ')}]`;
  });
  const notes = order.map((n, i) => footnote(i + 1, byN.get(n)!));
  return [body, ...(notes.length > 0 ? [`Sources:\n${notes.join('\n')}`] : []), ...(caution ? [caution] : [])].join('\n\n');
}
