// Abbreviations a collection defines for itself: "time off in lieu (TOIL)", "Personally
// Identifiable Information ("PII")". A question that uses one form finds sentences that use the
// other, with no word list: the pairs come from the documents.
//
// The method is Schwartz and Hearst's ("A simple algorithm for identifying abbreviation
// definitions in biomedical text", PSB 2003): a short form in parentheses after its long form (or
// the reverse), the long form's window limited to min(|SF| + 5, 2·|SF|) words, and the long form
// found by matching the short form's characters right to left, the first of them at a word start.
// One restriction of our own: a short form is a single token with at least two capital letters, so
// ordinary parentheticals ("(see below)", "(or both)") are never read as abbreviations.

export interface Abbreviation {
  /** As written, e.g. "TOIL". */
  short: string;
  /** Lower-cased, e.g. "time off in lieu". */
  long: string;
}

// "( ... )" with no nested parentheses, at most 60 characters inside.
const PAREN_RE = /\(([^()\n]{1,60})\)/g;
const QUOTES_RE = /^[\s"'“”‘’]+|[\s"'“”‘’,;]+$/g;

function isShortForm(s: string): boolean {
  return /^[\p{L}\p{N}][\p{L}\p{N}&./-]{1,9}$/u.test(s) && (s.match(/\p{Lu}/gu)?.length ?? 0) >= 2 && /\p{L}/u.test(s);
}

const isAlnum = (c: string | undefined): boolean => c !== undefined && /[\p{L}\p{N}]/u.test(c);

/** The long form inside `candidate` that `short` abbreviates, or null (Schwartz and Hearst's findBestLongForm). */
export function bestLongForm(short: string, candidate: string): string | null {
  const sf = short.toLowerCase();
  const lf = candidate.toLowerCase();
  let s = sf.length - 1;
  let l = lf.length - 1;
  for (; s >= 0; s--) {
    const c = sf[s] as string;
    if (!isAlnum(c)) continue;
    while (l >= 0 && (lf[l] !== c || (s === 0 && l > 0 && isAlnum(lf[l - 1])))) l--;
    if (l < 0) return null;
    l--;
  }
  const start = lf.lastIndexOf(' ', l) + 1;
  return lf.slice(start).trim();
}

const words = (s: string): string[] => s.split(/\s+/).filter(Boolean);

function pair(short: string, before: string): Abbreviation | null {
  const sfLen = short.replace(/[^\p{L}\p{N}]/gu, '').length;
  const window = Math.min(sfLen + 5, sfLen * 2);
  // The long form lies in the same clause, just before the parenthesis.
  const clause = before.split(/[.;:!?()\n]/).pop() ?? '';
  const candidate = words(clause.replace(QUOTES_RE, '')).slice(-window).join(' ');
  if (!candidate) return null;
  const long = bestLongForm(short, candidate)?.replace(QUOTES_RE, '');
  if (!long) return null;
  const n = words(long).length;
  if (n < 2 || n > window || long.length <= short.length || long.includes(short.toLowerCase())) return null;
  return { short, long };
}

/** Every abbreviation the text defines, in order of appearance (repeats included). */
export function findAbbreviations(text: string): Abbreviation[] {
  const out: Abbreviation[] = [];
  for (const m of text.matchAll(PAREN_RE)) {
    const inner = (m[1] ?? '').replace(QUOTES_RE, '').trim();
    const before = text.slice(Math.max(0, m.index - 200), m.index);
    if (isShortForm(inner)) {
      const p = pair(inner, before);
      if (p) out.push(p);
      continue;
    }
    // The reverse order: "TOIL (time off in lieu)".
    const prev = /([\p{L}\p{N}][\p{L}\p{N}&./-]{1,9})\s*$/u.exec(before)?.[1];
    if (prev && isShortForm(prev) && words(inner).length >= 2) {
      const long = bestLongForm(prev, inner);
      if (long && long === inner.toLowerCase() && words(long).length <= Math.min(prev.length + 5, prev.length * 2)) out.push({ short: prev, long });
    }
  }
  return out;
}
