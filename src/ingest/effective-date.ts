const MONTHS: Record<string, number> = {
  jan: 1, feb: 2, mar: 3, apr: 4, may: 5, jun: 6, jul: 7, aug: 8, sep: 9, oct: 10, nov: 11, dec: 12,
};
const MONTH = '(jan(?:uary)?|feb(?:ruary)?|mar(?:ch)?|apr(?:il)?|may|june?|july?|aug(?:ust)?|sept?(?:ember)?|oct(?:ober)?|nov(?:ember)?|dec(?:ember)?)\\.?';
const WEEKDAY = '(?:(?:mon|tues|wednes|thurs|fri|satur|sun)day,?\\s+)?';

// Each pattern is anchored at the start of the text that follows a trigger phrase.
const DATE_PATTERNS: { re: RegExp; ymd: (m: RegExpExecArray) => [string, string, string] }[] = [
  { re: /^(\d{4})[-/.](\d{1,2})[-/.](\d{1,2})\b/, ymd: (m) => [m[1]!, m[2]!, m[3]!] },
  {
    re: new RegExp(`^${WEEKDAY}(\\d{1,2})(?:st|nd|rd|th)?\\s+(?:of\\s+)?${MONTH},?\\s+(\\d{4})\\b`, 'i'),
    ymd: (m) => [m[3]!, m[2]!, m[1]!],
  },
  {
    re: new RegExp(`^${WEEKDAY}${MONTH}\\s+(\\d{1,2})(?:st|nd|rd|th)?,?\\s+(\\d{4})\\b`, 'i'),
    ymd: (m) => [m[3]!, m[1]!, m[2]!],
  },
  // Numeric dates are read day first, as the documents this service targets are written.
  { re: /^(\d{1,2})[/.-](\d{1,2})[/.-](\d{4})\b/, ymd: (m) => [m[3]!, m[2]!, m[1]!] },
];

function monthNumber(s: string): number {
  if (/^\d+$/.test(s)) return Number(s);
  return MONTHS[s.toLowerCase().slice(0, 3)] ?? 0;
}

function toIso(y: string, mo: string, d: string): string | null {
  const year = Number(y);
  const month = monthNumber(mo);
  const day = Number(d);
  if (month < 1 || month > 12 || day < 1) return null;
  const daysInMonth = new Date(Date.UTC(year, month, 0)).getUTCDate();
  if (day > daysInMonth) return null;
  return `${String(year).padStart(4, '0')}-${String(month).padStart(2, '0')}-${String(day).padStart(2, '0')}`;
}

/** Reads a date at the very start of `s` in any of the supported forms, as YYYY-MM-DD. */
export function parseDateAt(s: string): string | null {
  const text = s.trimStart();
  for (const { re, ymd } of DATE_PATTERNS) {
    const m = re.exec(text);
    if (m) return toIso(...ymd(m));
  }
  return null;
}

const METADATA_KEYS = ['effective', 'effective_date', 'effective-date', 'effectivedate', 'date'];

// "Effective from 1 March 2026", "Effective date: 2026-03-01", "comes into effect on ...",
// "in effect as of ...": the date follows the trigger after optional connecting words.
const TRIGGER =
  /\b(?:effective|(?:comes?|came|come)\s+into\s+effect|in\s+effect|takes?\s+effect)\b(?:\s+(?:date|from|on|as\s+(?:of|from)|since|starting|with\s+effect\s+from))*\s*[:\-–—]?\s*(?:on\s+|from\s+)?/gi;

/**
 * The date from which a document applies, as YYYY-MM-DD: front-matter style metadata first
 * (`effective`, `effective_date`, `date`), then the first dated "effective ..." phrase in the text.
 */
export function findEffectiveDate(text: string, metadata: Record<string, string>): string | null {
  const lowered = new Map(Object.entries(metadata).map(([k, v]) => [k.toLowerCase(), v]));
  for (const key of METADATA_KEYS) {
    const value = lowered.get(key);
    if (value === undefined) continue;
    const iso = parseDateAt(value);
    if (iso) return iso;
  }
  for (const m of text.matchAll(TRIGGER)) {
    const iso = parseDateAt(text.slice(m.index + m[0].length, m.index + m[0].length + 40));
    if (iso) return iso;
  }
  return null;
}

const VERSION_KEYS = ['version', 'revision', 'issue'];
// "Version 3.1", "Version: 2", "Revision 4b", "Issue 4", "Document version 2.0": only at a line
// start or after a separator such as " - " or "|", and capitalised, because "issue 2 tickets" in
// the middle of a sentence is not a version statement.
const VERSION =
  /(?:^|[|–—·•(]\s*|\s-\s+|,\s*)(?:Document\s+|DOCUMENT\s+)?(?:Version|VERSION|[Vv]ersion(?=\s*[:#])|Revision|REVISION|Rev\.|Issue|ISSUE)\s*(?:no\.?\s*|number\s*)?[:#]?\s*[vV]?(\d{1,4}(?:\.\d{1,4}){0,3}[a-z]?)(?![\w.]*\d)/gmu;

// "Document code MVT-HR-014, issue 3.": lower case is accepted only as a clause of its own, after
// a comma or semicolon (or at a line start) and ending at punctuation, so "issue 2 tickets" is not one.
const CLAUSE_VERSION =
  /(?:^|[,;]\s*)(?:document\s+)?(?:version|revision|issue)\s+(?:no\.?\s*)?v?(\d{1,4}(?:\.\d{1,4}){0,3}[a-z]?)(?=\s*(?:[.,;)]|$))/gmu;

/**
 * The version or issue a document states of itself: front-matter style metadata first
 * (`version`, `revision`, `issue`), then the first "Version 3.1" / "Issue 4" label in the text.
 */
export function findVersion(text: string, metadata: Record<string, string>): string | null {
  const lowered = new Map(Object.entries(metadata).map(([k, v]) => [k.toLowerCase(), v.trim()]));
  for (const key of VERSION_KEYS) {
    const value = lowered.get(key);
    if (value) return value;
  }
  // The earliest statement wins, whichever of the two forms it takes.
  const found = [VERSION, CLAUSE_VERSION]
    .map((re) => re.exec(text) ?? null)
    .filter((m): m is RegExpExecArray => m !== null)
    .sort((a, b) => a.index - b.index);
  VERSION.lastIndex = 0;
  CLAUSE_VERSION.lastIndex = 0;
  return found[0]?.[1] ?? null;
}

/** Metadata with `version` filled in when the document states one and the metadata lacks it. */
export function withVersion(metadata: Record<string, string>, text: string): Record<string, string> {
  if (metadata['version']) return metadata;
  const version = findVersion(text, metadata);
  return version === null ? metadata : { ...metadata, version };
}
