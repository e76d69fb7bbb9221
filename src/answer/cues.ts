// Question analysis to an expected answer type, after the coarse classes of Li and Roth,
// "Learning Question Classifiers" (COLING 2002): NUM (money, duration, date, count, percentage,
// frequency, age, measure), LOC, HUM, and contact details, plus "rule" for the yes/no questions
// policy readers ask. A sentence that holds the expected type is far more likely the answer than
// one that only shares topic words with the question. The patterns are general English question
// forms and general surface forms of each type, written from that taxonomy, not from any question set.

export type AnswerKind =
  | 'money'
  | 'percentage'
  | 'duration'
  | 'frequency'
  | 'time'
  | 'age'
  | 'count'
  | 'measure'
  | 'phone'
  | 'contact'
  | 'place'
  | 'agent'
  | 'rule';

const NUMBER_WORD =
  '(?:\\d+(?:[.,]\\d+)?|one|two|three|four|five|six|seven|eight|nine|ten|eleven|twelve|thirteen|fourteen|fifteen|sixteen|eighteen|twenty|thirty|forty|fifty|sixty|ninety|hundred)';
const MONTH = '(?:january|february|march|april|may|june|july|august|september|october|november|december|jan|feb|mar|apr|jun|jul|aug|sep|sept|oct|nov|dec)';

/** Surface forms of each type of fact. */
const FACT: Record<AnswerKind, RegExp> = {
  money: /[£$€¥]\s?\d|\b\d+(?:\.\d+)?\s?(?:p|pence|cents?|pounds?|dollars?|euros?)\b|\bno charge\b|\bfree of charge\b|\bfree\b|\bnot charged\b|\bno fee\b/i,
  percentage: /\b\d+(?:\.\d+)?\s?(?:%|per\s?cent|percent)/i,
  duration: new RegExp(
    `\\b(?:${NUMBER_WORD}|a|an)[\\s-]+(?:full\\s+|working\\s+|calendar\\s+|consecutive\\s+|clear\\s+|business\\s+|school\\s+)?(?:seconds?|minutes?|mins?|hours?|hrs?|days?|nights?|weeks?|fortnights?|months?|years?|terms?)\\b|\\bwithin\\s+(?:a|one|the same)\\s+(?:day|week|month|year)\\b|\\bsame day\\b|\\bnext working day\\b|\\bimmediately\\b`,
    'i',
  ),
  frequency: /\bevery\b|\bonce\b|\btwice\b|\b\d+\s+times\b|\b(?:daily|weekly|fortnightly|monthly|quarterly|annually|yearly|hourly)\b|\b(?:a|per|each)\s+(?:day|week|month|year|visit|term)\b/i,
  time: new RegExp(
    `\\b\\d{1,2}[:.]\\d{2}\\b|\\b\\d{1,2}\\s?(?:am|pm)\\b|\\bnoon\\b|\\bmidnight\\b|\\b\\d{1,2}(?:st|nd|rd|th)?\\s+${MONTH}\\b|\\b${MONTH}\\s+\\d{1,2}\\b|\\b(?:monday|tuesday|wednesday|thursday|friday|saturday|sunday)s?\\b|\\b(?:19|20)\\d{2}\\b|\\bday\\s+\\d+\\b`,
    'i',
  ),
  age: /\baged?\s+\d+|\b\d+\s*(?:or|and)\s+(?:over|older|above|under|younger)\b|\b(?:under|over)[\s-]+\d+s?\b|\b\d+[\s-]+(?:years?[\s-]+old|year-olds?)\b|\b\d+\s*(?:to|-|–)\s*\d+\s*(?:years?|year-olds?)\b/i,
  count: new RegExp(`(?<!^[\\s\\d.]*)\\b${NUMBER_WORD}\\s+(?!of\\b)\\p{L}{3,}|\\bup to\\s+\\d+\\b|\\b(?:total|maximum|minimum|limit|most) of\\s+${NUMBER_WORD}\\b`, 'iu'),
  measure: /\b\d+(?:\.\d+)?\s*(?:metres?|meters?|m|cm|mm|km\/h|km|mph|miles?|v|kv|volts?|kg|g|litres?|°c|degrees?)\b/i,
  phone: /(?:\+\d{1,3}[\s-]?)?\(?\b0\d{2,4}\)?[\s-]?\d{3,4}[\s-]?\d{3,4}\b|\b\d{3}[\s-]\d{3}[\s-]\d{4}\b/,
  contact: /[\w.+-]+@[\w-]+(?:\.[\w-]+)+|\bhttps?:\/\/\S+|\bwww\.\S+|\b[\w-]+\.(?:example|org|com|net|gov|uk)(?:\/\S*)?\b/i,
  place: /\b(?:at|to|in|from|on)\s+(?:the\s+|our\s+|any\s+)?(?:\p{Lu}\p{L}+|desk|counter|reception|office|online|website|branch|centre|center|library|portal|app)\b/u,
  agent: /\b\p{Lu}\p{L}+(?:\s+(?:of\s+|and\s+)?\p{Lu}\p{L}+)+\b|\b(?:team|officer|manager|department|panel|service|supervisor|coordinator|co-ordinator|director|lead|adviser|advisor|ombudsman|committee|board)\b/u,
  rule: /\b(?:allowed|not|may|must|only|cannot|can't|permitted|prohibited|never|no|need|required|have to|do not|don't)\b/i,
};

// Question forms and the type each asks for, most specific first.
const ASKS: readonly [RegExp, AnswerKind][] = [
  [/\b(?:phone|telephone|helpline|contact)\s+numbers?\b|\bwhat number\b|\bwhich number\b|\bnumber (?:do|should|can) i (?:call|ring|phone|use)\b/i, 'phone'],
  [/\be-?mail(?: address)?\b|\bweb ?site\b|\bweb address\b|\burl\b|\bonline address\b/i, 'contact'],
  [/\bwhat percent(?:age)?\b|\bhow much percent\b|\bpercentage\b|\bwhat (?:share|proportion)\b/i, 'percentage'],
  [/\bhow often\b|\bhow frequently\b|\bhow many times (?:a|per|each|every)\b/i, 'frequency'],
  [/\bhow old\b|\bwhat age\b|\b(?:minimum|maximum|lowest|youngest) age\b|\bage limit\b/i, 'age'],
  [
    /\bhow (?:long|soon|quickly)\b|\bhow far in advance\b|\bhow many (?:seconds|minutes|hours|days|nights|weeks|months|years)\b|\bby when\b|\bdeadline\b|\btime limit\b|\bwhat period\b/i,
    'duration',
  ],
  [/\bhow far\b|\bwhat (?:voltage|speed|distance|weight|temperature|height|depth|size)\b|\bspeed limit\b/i, 'measure'],
  [
    /\bhow much\b|\bwhat (?:does|do|would|will|did) .{1,40}\b(?:cost|charge|pay)\b|\bwhat(?:'s| is| are)? the (?:\w+ ){0,3}(?:cost|price|fee|fare|charge|rate|fine|limit|amount|allowance|deposit)s?\b|\bhow expensive\b/i,
    'money',
  ],
  [/\bhow many\b|\bwhat number of\b|\bmaximum number\b|\bup to how many\b/i, 'count'],
  [/^\W*when\b|\bwhen (?:is|are|does|do|will|can|should|must|did)\b|\bwhat time\b|\bwhat (?:days?|dates?|hours?)\b|\bwhich (?:days?|dates?|month|week)\b|\bopening hours\b/i, 'time'],
  [/^\W*where\b|\bwhere (?:is|are|does|do|can|should|must|will)\b|\bwhich (?:address|office|branch|desk|building)\b/i, 'place'],
  [/^\W*who\b|\bwho (?:is|are|does|do|can|should|must|will|decides|deals|handles)\b|\bwhich (?:team|department|officer|body|organisation|organization|person)\b|\bwho to\b/i, 'agent'],
  [/^\W*(?:can|could|may|am|is|are|do|does|did|will|would|should|must|have|has)\b|\ballowed\b|\bpermitted\b|\bok to\b/i, 'rule'],
];

/** The type of fact the question asks for, or null for an open question. */
export function answerCue(question: string): AnswerKind | null {
  for (const [re, kind] of ASKS) if (re.test(question)) return kind;
  return null;
}

// Types precise enough that a sentence lacking one does not answer the question at all.
const STRICT: ReadonlySet<AnswerKind> = new Set(['money', 'percentage', 'duration', 'frequency', 'time', 'age', 'count', 'measure', 'phone', 'contact']);

/** True when the type is precise (a figure, a date, a number to call), not a yes/no or a place. */
export function isStrictKind(kind: AnswerKind | null): boolean {
  return kind !== null && STRICT.has(kind);
}

/** True when the text holds a fact of the kind. */
export function holdsKind(kind: AnswerKind, text: string): boolean {
  // Money questions are often answered by a rate or a share ("12% of the cost").
  if (kind === 'money' && FACT.percentage.test(text)) return true;
  // "How long" is sometimes answered with a date or day number ("by day 21").
  if (kind === 'duration' && FACT.time.test(text) && /\b(?:day|by|until|before)\s+\d+/i.test(text)) return true;
  return FACT[kind].test(text);
}

/** True when the question asks for a precise kind of fact and the sentence holds none. */
export function missesKind(kind: AnswerKind | null, sentence: string): boolean {
  return kind !== null && STRICT.has(kind) && !holdsKind(kind, sentence);
}
