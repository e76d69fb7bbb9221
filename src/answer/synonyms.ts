// Question terms with their everyday equivalents. Customers ask in their own words ("money
// back", "hang on to", "bicycle") while policies use the trade's ("refund", "kept", "bike").
// Without a sentence model the service has no other way to see that these are the same, so
// a small hand-written table of transit and policy vocabulary stands in. It only ever adds
// alternatives: a question word still matches itself.

import { contentTokens, stem, tokenize } from './words.js';

/**
 * Each row is one meaning. A question phrase found in a row becomes one term that any member
 * of the row satisfies; members with several words must all be present. Written from
 * general knowledge of how passengers and staff word policy questions, not from any list.
 */
const GROUPS: readonly (readonly string[])[] = [
  ['refund', 'money back', 'anything back', 'money', 'compensation', 'compensate', 'reimburse', 'repay'],
  ['delay', 'late', 'late-running', 'behind schedule', 'running late', 'overdue'],
  ['bike', 'bicycle', 'cycle', 'cyclist'],
  ['dog', 'animal', 'pet'],
  ['kept', 'keep', 'held', 'hold', 'store', 'stored', 'retain', 'hang on to', 'hang onto'],
  ['item', 'property', 'belongings', 'umbrella', 'bag', 'wallet', 'keys', 'coat', 'luggage'],
  ['lost', 'left', 'found', 'forgot', 'forgotten', 'mislaid'],
  ['complaint', 'complain', 'grumble', 'grievance'],
  ['satisfied', 'unhappy', 'dissatisfied'],
  ['senior', 'gran', 'granny', 'grandmother', 'grandfather', 'grandparent', 'pensioner', 'elderly'],
  ['call', 'ring', 'ringing', 'telephone', 'phone call', 'phone calls'],
  ['ill', 'sick', 'sickness', 'unwell'],
  ['leave', 'days off', 'time off', 'holiday', 'vacation'],
  ['employee', 'worker', 'staff', 'colleague'],
  ['overhead line', 'live wire', 'live wires', 'wires', 'overhead wire', 'cable'],
  ['pay', 'paid', 'settle', 'settle up'],
  ['within', 'quickly', 'promptly', 'limit', 'time limit', 'deadline'],
  ['cost', 'price', 'fee'],
  ['help', 'assistance', 'assist', 'support'],
  ['turn up', 'show up'],
  ['wheelchair', 'mobility', 'disabled', 'disability'],
  ['record', 'recording'],
  ['route', 'number'],
  ['aged', 'age', 'how old'],
  ['scooter', 'e-scooter', 'electric scooter'],
  ['penalty', 'fine', 'without a ticket'],
  ['away', 'stay', 'distance', 'clear of'],
  ['taken', 'go', 'goes', 'sent'],
  ['valid', 'accepted', 'approved'],
  ['refer', 'look at', 'look into', 'escalate', 'review'],
  ['response', 'reply', 'answer'],
  ['mvt', 'company', 'operator'],
  ['travel', 'ride', 'rides', 'journey'],
  ['wear', 'worn', 'wore'],
];

// Everyday verbs, adverbs and fillers that questions use to frame a topic without naming it
// ("make a claim", "is it OK to bring", "where does it go first"). Written from memory, not
// from a published list; they still count, but weigh little when judging coverage.
const LIGHT = new Set(
  (
    'make made take took taken put get got give given gave go goes going come came need needed want like use used ' +
    'know tell told say said see look ask asked feel bring brought turn turned happen happens try still just really ' +
    'ok okay true false different same else anything something everything thing things way lot actually quite ' +
    'possible able mean means right sure whole certain first even kind sort type allow allowed caught old new ' +
    'previous current'
  )
    .split(' ')
    .map((w) => stem(w)),
);

/** True for a term that frames the question rather than naming its topic. */
export function isLightTerm(term: QuestionTerm): boolean {
  return term.alts.length === 1 && term.alts[0]?.length === 1 && LIGHT.has(term.alts[0][0] ?? '');
}

export interface QuestionTerm {
  /** The question's own wording of the term. */
  label: string;
  /** Ways to satisfy the term: each is a list of stems that must all be present. */
  alts: string[][];
}

interface Member {
  group: number;
  re: RegExp;
  stems: string[];
}

const MEMBERS: Member[] = GROUPS.flatMap((row, group) =>
  row.map((phrase) => ({
    group,
    re: new RegExp(`(?<![\\p{L}\\p{N}])${phrase.replace(/[-\s]+/g, '[-\\s]+')}(?![\\p{L}\\p{N}])`, 'giu'),
    stems: phraseStems(phrase),
  })),
).sort((a, b) => b.re.source.length - a.re.source.length);

function phraseStems(phrase: string): string[] {
  const content = contentTokens(phrase).map((t) => t.stem);
  return content.length > 0 ? content : tokenize(phrase).map((t) => t.stem);
}

function groupAlts(group: number): string[][] {
  return MEMBERS.filter((m) => m.group === group && m.stems.length > 0).map((m) => m.stems);
}

/**
 * The question's content terms: phrases from the table first (longest wins), then each
 * remaining content word on its own. Duplicates by stem are dropped.
 */
export function questionTerms(question: string): QuestionTerm[] {
  const taken: boolean[] = new Array<boolean>(question.length).fill(false);
  const found: { at: number; term: QuestionTerm }[] = [];
  for (const m of MEMBERS) {
    for (const hit of question.matchAll(m.re)) {
      const s = hit.index;
      const e = s + hit[0].length;
      if (taken.slice(s, e).some(Boolean)) continue;
      for (let i = s; i < e; i++) taken[i] = true;
      found.push({ at: s, term: { label: hit[0].toLowerCase(), alts: groupAlts(m.group) } });
    }
  }
  for (const t of contentTokens(question)) {
    if (taken.slice(t.start, t.end).some(Boolean)) continue;
    found.push({ at: t.start, term: { label: t.word, alts: [[t.stem]] } });
  }
  found.sort((a, b) => a.at - b.at);
  const out: QuestionTerm[] = [];
  const seen = new Set<string>();
  for (const { term } of found) {
    const key = term.alts.map((a) => a.join(' ')).sort().join('|');
    if (seen.has(key)) continue;
    seen.add(key);
    out.push(term);
  }
  return out;
}

/** True when a set of stems satisfies the term. */
export function termIn(term: QuestionTerm, stems: ReadonlySet<string>): boolean {
  return term.alts.some((alt) => alt.every((s) => stems.has(s)));
}

/**
 * Words to add to a retrieval query so that lexical search can find the policy's wording of
 * a term the question phrased its own way. Only single-word alternatives not already asked.
 */
export function expansionWords(question: string): string[] {
  const have = new Set(tokenize(question).map((t) => t.stem));
  const out: string[] = [];
  for (const term of questionTerms(question)) {
    if (term.alts.length < 2) continue;
    for (const alt of term.alts) {
      const [only] = alt;
      if (alt.length !== 1 || only === undefined || have.has(only)) continue;
      const word = MEMBER_WORDS.get(only);
      if (word) {
        have.add(only);
        out.push(word);
      }
    }
  }
  return out;
}

// The surface word for each single-word stem, so expansions read as words in logs and FTS.
const MEMBER_WORDS = new Map<string, string>(
  GROUPS.flat()
    .filter((p) => !/[\s-]/.test(p))
    .map((p) => [stem(p), p] as const),
);
