// Turns free user text into an FTS5 MATCH expression that can never be a syntax error: every term is
// a double-quoted string (quotes inside doubled), joined with OR, so operators, column filters,
// parentheses and stray quotes in the question are matched as plain words, not interpreted.

import { gcd } from '../numbers.js';

// Function words that carry no topic. Dropping them keeps OR queries cheap and stops "what is the"
// from matching every chunk. The first block is the list the service started with; the second adds
// pronouns, auxiliaries, quantifiers and connectives (written for this project from general English
// grammar, not copied from a published list). Measured on CISI (docs/benchmarks.md): the longer list
// raised lexical nDCG@10, because CISI's questions are long and wordy.
const BASE_STOP = `a an and are as at be been being but by can could did do does for from had has have how i if in into is it
  its me my of on or our shall should so than that the their them then there these they this those to was we were
  what when where which while who whom why will with would you your yours am any about`;
const EXTRA_STOP = `also all after again against along although among another anyone anything around because before
  behind below beside besides between both cannot come comes down during each either else ever every
  few further given gives he her here hers herself him himself his however itself just least less like may
  might mine more most much must myself neither no nor not now off often once one only onto other others
  ought ours ourselves out over own per perhaps please rather same she since some something such
  theirs themselves thereby therefore thus till too toward towards under unless until up upon us very via
  whatever whenever whereas whether whichever whoever whose within without yet yourself yourselves
  i'm it's don't doesn't isn't aren't wasn't weren't won't can't couldn't shouldn't wouldn't
  im dont doesnt isnt arent wasnt werent wont cant couldnt shouldnt wouldnt`;

export const STOP_WORDS: ReadonlySet<string> = new Set(`${BASE_STOP} ${EXTRA_STOP}`.split(/\s+/).filter(Boolean).map((w) => w.replace(/['’]/g, '')));

const WORD = /[\p{L}\p{N}]+(?:['’][\p{L}]+)?/gu;

/** Lower-cased word tokens of `text`, in order. */
export function queryTerms(text: string): string[] {
  const out: string[] = [];
  for (const m of text.normalize('NFKC').toLowerCase().matchAll(WORD)) out.push(m[0].replace(/['’]/g, ''));
  return out;
}

/**
 * Content terms with how often each occurs in the query, in first-seen order. Repeats matter in long
 * questions ("... retrieval ... retrieval systems"), as the query-term-frequency factor of BM25.
 */
export function termCounts(text: string): Map<string, number> {
  const terms = queryTerms(text);
  const content = terms.filter((t) => !STOP_WORDS.has(t));
  const out = new Map<string, number>();
  for (const t of content.length > 0 ? content : terms) out.set(t, (out.get(t) ?? 0) + 1);
  return out;
}

export interface WeightedTerm {
  term: string;
  weight: number;
}

/** One query phrase: a term and how many times its phrase is written (its weight as a whole multiple). */
export interface PhraseCount {
  term: string;
  count: number;
}

/**
 * Weighted terms as whole repeat counts. FTS5 has no per-term boost, but its bm25() sums over the phrases of
 * the query, so a phrase written n times counts n times: weights are scaled so the heaviest gets `maxRepeat`,
 * rounded, at least 1. Dividing every count by their greatest common divisor scales all scores by one constant,
 * so the ranking is the same with fewer phrases (each phrase costs FTS5 work on every matching row): equal
 * weights, the usual case for a short question, become one copy each. The in-memory engine uses the same
 * counts as multipliers, so both engines score the same weighted query.
 */
export function phraseCounts(terms: readonly WeightedTerm[], opts: { maxTerms?: number; maxRepeat?: number } = {}): PhraseCount[] {
  const maxTerms = opts.maxTerms ?? 64;
  const maxRepeat = opts.maxRepeat ?? 4;
  const kept = terms.filter((t) => t.weight > 0 && t.term !== '').slice(0, maxTerms);
  if (kept.length === 0) return [];
  const top = Math.max(...kept.map((t) => t.weight));
  const counts = kept.map((t) => Math.max(1, Math.min(maxRepeat, Math.round((t.weight / top) * maxRepeat))));
  const g = counts.reduce(gcd);
  return kept.map((t, i) => ({ term: t.term, count: counts[i]! / g }));
}

/**
 * An FTS5 MATCH expression for weighted terms: each term's phrase written as many times as phraseCounts says.
 * Terms are quoted (quotes inside doubled), so the expression cannot fail to parse.
 */
export function toWeightedMatch(terms: readonly WeightedTerm[], opts: { maxTerms?: number; maxRepeat?: number } = {}): string | null {
  const counts = phraseCounts(terms, opts);
  if (counts.length === 0) return null;
  const parts: string[] = [];
  for (const { term, count } of counts) {
    const quoted = `"${term.replace(/"/g, '""')}"`;
    for (let r = 0; r < count; r++) parts.push(quoted);
  }
  return parts.join(' OR ');
}
