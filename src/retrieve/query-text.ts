// Turns free user text into an FTS5 MATCH expression that can never be a syntax error: every term is
// a double-quoted string (quotes inside doubled), joined with OR, so operators, column filters,
// parentheses and stray quotes in the question are matched as plain words, not interpreted.

// Function words that carry no topic. Dropping them keeps OR queries cheap and stops "what is the"
// from matching every chunk. A short list, common practice in IR; not tuned.
export const STOP_WORDS: ReadonlySet<string> = new Set(
  `a an and are as at be been being but by can could did do does for from had has have how i if in into is it
  its me my of on or our shall should so than that the their them then there these they this those to was we were
  what when where which while who whom why will with would you your yours am any about`.split(/\s+/),
);

const WORD = /[\p{L}\p{N}]+(?:['’][\p{L}]+)?/gu;

/** Lower-cased word tokens of `text`, in order. */
export function queryTerms(text: string): string[] {
  const out: string[] = [];
  for (const m of text.normalize('NFKC').toLowerCase().matchAll(WORD)) out.push(m[0].replace(/['’]/g, ''));
  return out;
}

/** Content terms of a query: stop words dropped (all terms kept when nothing else is left), duplicates removed. */
export function contentTerms(text: string): string[] {
  const terms = queryTerms(text);
  const content = terms.filter((t) => !STOP_WORDS.has(t));
  return [...new Set(content.length > 0 ? content : terms)];
}

/** An FTS5 MATCH expression for the query, or null when it has no searchable term. */
export function toMatchExpression(text: string, maxTerms = 64): string | null {
  const terms = contentTerms(text).slice(0, maxTerms);
  if (terms.length === 0) return null;
  return terms.map((t) => `"${t.replace(/"/g, '""')}"`).join(' OR ');
}
