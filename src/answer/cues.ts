// The kind of fact a question asks for. "How long" wants a duration, "how much" an amount,
// "can I" a rule; a sentence holding that kind of fact is more likely the answer than one
// that only shares topic words with the question.

export type AnswerKind = 'duration' | 'amount' | 'time' | 'age' | 'count' | 'measure' | 'place' | 'rule';

const NUMBER_WORD = '(?:\\d+(?:\\.\\d+)?|one|two|three|four|five|six|seven|eight|nine|ten|eleven|twelve|fourteen|twenty|thirty)';

const FACT: Record<AnswerKind, RegExp> = {
  duration: new RegExp(`\\b${NUMBER_WORD}[\\s-]+(?:working\\s+|calendar\\s+|consecutive\\s+)?(?:minutes?|hours?|days?|weeks?|months?|years?)\\b`, 'i'),
  amount: /[£$€]\s?\d|\b\d+(?:\.\d+)?\s?(?:%|percent|pence)|\bno charge\b|\bfree\b|\bhalf\b/i,
  time: /\b\d{1,2}[:.]\d{2}\b|\b\d{1,2}\s+(?:january|february|march|april|may|june|july|august|september|october|november|december)\b|\b(?:monday|tuesday|wednesday|thursday|friday|saturday|sunday)s?\b/i,
  age: /\baged?\s+\d+|\b\d+\s+(?:or\s+over|and\s+over|or\s+older)\b|\bunder\s+\d+\b/i,
  // A number before a word, but not a clause number opening the sentence ("1.1 These ...").
  count: new RegExp(`(?<!^[\\s\\d.]*)\\b${NUMBER_WORD}\\s+(?!of\\b)\\p{L}{3,}`, 'iu'),
  measure: /\b\d+(?:\.\d+)?\s*(?:metres?|meters?|m|km\/h|km|mph|miles?|v|kv|volts?|kg)\b/i,
  place: /\b(?:at|to|in|from)\s+(?:the\s+)?\p{Lu}\p{L}+/u,
  rule: /\b(?:allowed|not|may|must|only|cannot|permitted|prohibited|never|no)\b/i,
};

// Question openers and the kind of fact each asks for, most specific first.
const ASKS: readonly [RegExp, AnswerKind][] = [
  [/\bhow (?:long|soon|quickly)\b|\bhow far (?:ahead|in advance)\b|\bhow many (?:minutes|hours|days|weeks|months|years)\b|\bby when\b|\bdeadline\b|\btime limit\b/i, 'duration'],
  [/\bhow old\b|\bwhat age\b|\bminimum age\b/i, 'age'],
  [/\bhow much\b|\bwhat (?:does|do|would|will) .{1,40}\bcost\b|\b(?:price|fee|fare|charge|compensation)\b.*\?\s*$/i, 'amount'],
  [/\bhow far\b|\bwhat (?:voltage|speed|distance|weight)\b|\bspeed limit\b/i, 'measure'],
  [/\bhow many\b/i, 'count'],
  [/^\W*when\b|\bwhat time\b|\bwhat (?:days|dates)\b|\bwhich (?:days|dates)\b/i, 'time'],
  [/^\W*where\b|\bwhere (?:is|are|does|do|can)\b/i, 'place'],
  [/^\W*(?:can|may|am|is|are|do|does)\b|\ballowed\b|\bpermitted\b|\bok to\b/i, 'rule'],
];

/** The kind of fact the question asks for, or null for an open question. */
export function answerCue(question: string): AnswerKind | null {
  for (const [re, kind] of ASKS) if (re.test(question)) return kind;
  return null;
}

// Enough to decide between sentences of similar coverage, not to outweigh a missing topic word.
const CUE_BONUS = 0.1;

// Kinds precise enough that a sentence lacking one does not answer the question at all.
const STRICT: ReadonlySet<AnswerKind> = new Set(['duration', 'amount', 'time', 'age', 'count', 'measure']);

/** True when the question asks for a precise kind of fact and the sentence holds none. */
export function missesKind(kind: AnswerKind | null, sentence: string): boolean {
  return kind !== null && STRICT.has(kind) && !FACT[kind].test(sentence);
}

/** The score lift for a sentence that holds the kind of fact asked for. */
export function cueBonus(kind: AnswerKind | null, sentence: string): number {
  return kind !== null && FACT[kind].test(sentence) ? CUE_BONUS : 0;
}
