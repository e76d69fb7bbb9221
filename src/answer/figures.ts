// Figures in a sentence (amounts of money, percentages, durations, clock times, dates, years and
// plain counts), each reduced to a comparable value, so a generated claim can be checked figure by
// figure against the passage it cites. Checking that every number of a generated statement occurs
// in its evidence is common practice in fact verification of generated text; the patterns and
// the number words below were written from general knowledge of English usage.

export type FigureKind = 'money' | 'percent' | 'duration' | 'time' | 'date' | 'year' | 'number';

export interface Figure {
  kind: FigureKind;
  /**
   * The comparable value: major currency units for money, minutes for short durations and clock
   * times, days for day/week durations, months for month/year durations, the year for a year,
   * month * 100 + day for a date, the number itself otherwise.
   */
  value: number;
  /** The number as written, before any unit conversion ("2" in "2 weeks"). */
  raw: number;
  /** Currency sign, duration base ("min", "day", "month"), or "" when there is none. */
  unit: string;
  /** "working" in "10 working days": a claim that states one must match it. */
  qualifier?: string;
  /** A date's year when it states one. */
  year?: number;
  /** Offsets in the text the figure was read from. */
  start: number;
  end: number;
}

const SMALL: Record<string, number> = {
  zero: 0, one: 1, two: 2, three: 3, four: 4, five: 5, six: 6, seven: 7, eight: 8, nine: 9, ten: 10,
  eleven: 11, twelve: 12, thirteen: 13, fourteen: 14, fifteen: 15, sixteen: 16, seventeen: 17, eighteen: 18, nineteen: 19,
};
const TENS: Record<string, number> = { twenty: 20, thirty: 30, forty: 40, fifty: 50, sixty: 60, seventy: 70, eighty: 80, ninety: 90 };
const MONTHS = ['january', 'february', 'march', 'april', 'may', 'june', 'july', 'august', 'september', 'october', 'november', 'december'];

const NUMBER_WORD = `(?:${[...Object.keys(TENS)].join('|')})(?:[-\\s](?:${Object.keys(SMALL).filter((w) => SMALL[w]! > 0 && SMALL[w]! < 10).join('|')}))?|${Object.keys(SMALL).join('|')}|a\\s+hundred|one\\s+hundred|a\\s+thousand|one\\s+thousand`;
const NUM = `(?:\\d{1,3}(?:,\\d{3})+|\\d+)(?:\\.\\d+)?`;
const UNIT_WORD = '(?:minutes?|mins?|hours?|hrs?|days?|weeks?|fortnights?|months?|years?)';
const QUALIFIER = '(?:working|business|calendar|clear|consecutive|school|banking|full)';
const CURRENCY_WORD = '(?:pounds?|pence|p|euros?|eur|cents?|dollars?|usd|gbp)';

// Written numbers become digits first, so "fourteen days" and "14 days" read alike. "One" only
// counts before a unit ("one week"): elsewhere it is usually a pronoun ("the one on the left").
const WORD_NUMBER = new RegExp(`\\b(${NUMBER_WORD})\\b(?=(?:-|\\s+)(?:${QUALIFIER}[-\\s]+)?(?:${UNIT_WORD}|per\\s?cent|percent|%|${CURRENCY_WORD}|\\p{L}+))`, 'giu');

function wordValue(w: string): number | null {
  const s = w.toLowerCase().replace(/\s+/g, ' ');
  if (/^(?:a|one) hundred$/.test(s)) return 100;
  if (/^(?:a|one) thousand$/.test(s)) return 1000;
  const parts = s.split(/[-\s]/);
  if (parts.length === 1) return SMALL[s] ?? TENS[s] ?? null;
  const tens = TENS[parts[0] ?? ''];
  const unit = SMALL[parts[1] ?? ''];
  return tens !== undefined && unit !== undefined ? tens + unit : null;
}

/** Written numbers replaced by digits, padded so every other offset stays where it was. */
function digitise(text: string): string {
  return text.replace(WORD_NUMBER, (m: string, w: string, offset: number, all: string) => {
    const v = wordValue(w);
    if (v === null) return m;
    // "one" is a number only before a unit of time, money or measure.
    if (v === 1 && !new RegExp(`^${m}(?:-|\\s+)(?:${QUALIFIER}[-\\s]+)?(?:${UNIT_WORD}|${CURRENCY_WORD})\\b`, 'i').test(all.slice(offset))) return m;
    const digits = String(v);
    return digits.padEnd(m.length, ' ');
  });
}

const toNumber = (s: string): number => Number(s.replace(/,/g, ''));

interface Rule {
  re: RegExp;
  read: (m: RegExpMatchArray) => Omit<Figure, 'start' | 'end'> | null;
}

const CURRENCY_SIGN: Record<string, string> = { '£': '£', $: '$', '€': '€' };

function currencyOf(word: string): { unit: string; scale: number } {
  const w = word.toLowerCase();
  if (w === 'pence' || w === 'p') return { unit: '£', scale: 0.01 };
  if (w.startsWith('pound') || w === 'gbp') return { unit: '£', scale: 1 };
  if (w.startsWith('euro') || w === 'eur') return { unit: '€', scale: 1 };
  if (w.startsWith('dollar') || w === 'usd') return { unit: '$', scale: 1 };
  // "cents" belongs to more than one currency.
  return { unit: '', scale: 0.01 };
}

function durationOf(n: number, unitWord: string): { value: number; unit: string } {
  const u = unitWord.toLowerCase();
  if (u.startsWith('min')) return { value: n, unit: 'min' };
  if (u.startsWith('h')) return { value: n * 60, unit: 'min' };
  if (u.startsWith('day')) return { value: n, unit: 'day' };
  if (u.startsWith('fortnight')) return { value: n * 14, unit: 'day' };
  if (u.startsWith('week')) return { value: n * 7, unit: 'day' };
  if (u.startsWith('month')) return { value: n, unit: 'month' };
  return { value: n * 12, unit: 'month' };
}

function clock(h: number, m: number, half: string | undefined): number | null {
  let hour = h;
  const ampm = half?.toLowerCase().replace(/\./g, '');
  if (ampm === 'pm' && hour < 12) hour += 12;
  if (ampm === 'am' && hour === 12) hour = 0;
  if (hour > 24 || m > 59) return null;
  return hour * 60 + m;
}

const MONTH = `(${MONTHS.join('|')}|jan|feb|mar|apr|jun|jul|aug|sept?|oct|nov|dec)\\.?`;
// "Item 3 may be refused": "may" followed by a word, without a year, is the verb.
const modalMay = (m: RegExpMatchArray, month: string | undefined, year: string | undefined): boolean =>
  month?.toLowerCase() === 'may' && !year && /^\s+\p{L}/u.test(m.input?.slice((m.index ?? 0) + m[0].length) ?? '');
const monthIndex = (w: string): number => MONTHS.findIndex((m) => m.startsWith(w.toLowerCase().replace(/\.$/, '').slice(0, 3))) + 1;

// Most specific first; a span taken by one rule is not read again by a later one.
const RULES: readonly Rule[] = [
  // 2026-03-01
  { re: /\b(\d{4})-(\d{2})-(\d{2})\b/g, read: (m) => ({ kind: 'date', value: Number(m[2]) * 100 + Number(m[3]), raw: Number(m[3]), unit: '', year: Number(m[1]) }) },
  // 1 March 2026, 1st of March
  {
    re: new RegExp(`\\b(\\d{1,2})(?:st|nd|rd|th)?\\s+(?:of\\s+)?${MONTH}(?:,?\\s+(\\d{4}))?\\b`, 'gi'),
    read: (m) => (modalMay(m, m[2], m[3]) ? null : { kind: 'date', value: monthIndex(m[2] ?? '') * 100 + Number(m[1]), raw: Number(m[1]), unit: '', ...(m[3] ? { year: Number(m[3]) } : {}) }),
  },
  // March 1, 2026
  {
    re: new RegExp(`\\b${MONTH}\\s+(\\d{1,2})(?:st|nd|rd|th)?(?:,?\\s+(\\d{4}))?\\b`, 'gi'),
    read: (m) => ({ kind: 'date', value: monthIndex(m[1] ?? '') * 100 + Number(m[2]), raw: Number(m[2]), unit: '', ...(m[3] ? { year: Number(m[3]) } : {}) }),
  },
  // 9:30, 9.30am, 17:00, 5pm
  {
    re: /\b(\d{1,2})[:.](\d{2})\s*(a\.?m\.?|p\.?m\.?)?(?![\d])/gi,
    read: (m) => {
      // "2.20" with no am/pm and no colon is a decimal, not a time.
      if (!m[3] && !m[0].includes(':')) return null;
      const v = clock(Number(m[1]), Number(m[2]), m[3]);
      return v === null ? null : { kind: 'time', value: v, raw: v, unit: '' };
    },
  },
  {
    re: /\b(\d{1,2})\s*(a\.?m\.?|p\.?m\.?)(?=\W|$)/gi,
    read: (m) => {
      const v = clock(Number(m[1]), 0, m[2]);
      return v === null ? null : { kind: 'time', value: v, raw: v, unit: '' };
    },
  },
  // £5, £5.00, € 12
  {
    re: new RegExp(`([£$€])\\s?(${NUM})`, 'g'),
    read: (m) => ({ kind: 'money', value: toNumber(m[2] ?? ''), raw: toNumber(m[2] ?? ''), unit: CURRENCY_SIGN[m[1] ?? ''] ?? '' }),
  },
  // 50p, 20 pence, 12 euros
  {
    re: new RegExp(`\\b(${NUM})\\s?(${CURRENCY_WORD})\\b`, 'gi'),
    read: (m) => {
      const c = currencyOf(m[2] ?? '');
      const n = toNumber(m[1] ?? '');
      return { kind: 'money', value: Math.round(n * c.scale * 100) / 100, raw: n, unit: c.unit };
    },
  },
  // 50%, 50 per cent
  { re: new RegExp(`\\b(${NUM})\\s?(?:%|per\\s?cent\\b|percent\\b)`, 'gi'), read: (m) => ({ kind: 'percent', value: toNumber(m[1] ?? ''), raw: toNumber(m[1] ?? ''), unit: '%' }) },
  // 10 working days, 28-day, 6 months
  {
    re: new RegExp(`\\b(${NUM})(?:-|\\s+)(?:(${QUALIFIER})[-\\s]+)?(${UNIT_WORD})\\b`, 'gi'),
    read: (m) => {
      const n = toNumber(m[1] ?? '');
      const d = durationOf(n, m[3] ?? '');
      const q = m[2]?.toLowerCase();
      return { kind: 'duration', value: d.value, raw: n, unit: d.unit, ...(q ? { qualifier: q === 'business' ? 'working' : q } : {}) };
    },
  },
  // A year on its own.
  { re: /\b(19\d{2}|20\d{2})\b/g, read: (m) => ({ kind: 'year', value: Number(m[1]), raw: Number(m[1]), unit: '' }) },
  // Any other number: counts, ages, amounts without a sign; "22nd" is 22. Codes such as "T2"
  // or "A12" are names, not figures: word overlap checks those.
  { re: new RegExp(`(?<![\\p{L}\\d.,])(${NUM})(?:st|nd|rd|th)?\\b`, 'gu'), read: (m) => ({ kind: 'number', value: toNumber(m[1] ?? ''), raw: toNumber(m[1] ?? ''), unit: '' }) },
];

/** Every figure of `text`, in reading order. */
export function figuresIn(text: string): Figure[] {
  const src = digitise(text);
  const taken: [number, number][] = [];
  const out: Figure[] = [];
  for (const rule of RULES) {
    rule.re.lastIndex = 0;
    for (const m of src.matchAll(rule.re)) {
      const start = m.index;
      const end = start + m[0].trimEnd().length;
      if (taken.some(([a, b]) => start < b && end > a)) continue;
      const f = rule.read(m);
      if (!f) continue;
      taken.push([start, end]);
      out.push({ ...f, start, end });
    }
  }
  return out.sort((a, b) => a.start - b.start);
}

/** "30 to 59", "15–29", "66 or over" as inclusive ranges of the numbers written. */
export function statedRanges(text: string): [number, number][] {
  const src = digitise(text);
  const out: [number, number][] = [];
  for (const m of src.matchAll(/(\d+(?:\.\d+)?)\s*(?:to|–|-|and)\s*(\d+(?:\.\d+)?)(?![:.]\d)/g)) {
    const lo = Number(m[1]);
    const hi = Number(m[2]);
    if (lo < hi) out.push([lo, hi]);
  }
  for (const m of src.matchAll(/(\d+(?:\.\d+)?)\s+(?:[a-z]+\s+)?or\s+(?:more|over|above|older|longer)\b/gi)) out.push([Number(m[1]), Infinity]);
  return out;
}

/**
 * True when the passage's figures state the claim's figure: the same kind and value (£5 is
 * £5.00, two weeks is 14 days), a plain number of the same value (a table cell under a unit
 * header), or, for a count or a duration, a value inside a range the passage states ("a
 * 35-minute delay" against "30 to 59 minutes"). A qualifier the claim adds ("working days")
 * must be the passage's too; a claim that drops one is let through.
 */
export function figureStated(claim: Figure, stated: readonly Figure[], ranges: readonly [number, number][] = []): boolean {
  for (const s of stated) {
    if (s.kind === claim.kind && s.unit === claim.unit && s.value === claim.value) {
      if (claim.kind === 'date' && claim.year !== undefined && s.year !== undefined && claim.year !== s.year) continue;
      if (claim.qualifier !== undefined && s.qualifier !== claim.qualifier) continue;
      return true;
    }
    // Money in an unnamed currency ("cents") matches by value.
    if (claim.kind === 'money' && s.kind === 'money' && (claim.unit === '' || s.unit === '') && s.value === claim.value) return true;
    if (s.kind === 'number' && s.raw === claim.raw && claim.kind !== 'date' && claim.kind !== 'time') return true;
    if (claim.kind === 'number' && s.raw === claim.raw) return true;
    if (claim.kind === 'year' && s.kind === 'date' && s.year === claim.value) return true;
  }
  if (claim.kind === 'number' || claim.kind === 'duration') return ranges.some(([lo, hi]) => claim.raw >= lo && claim.raw <= hi);
  return false;
}
