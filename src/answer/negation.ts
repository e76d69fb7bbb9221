// Which words of a sentence are negated. After NegEx (Chapman, Bridewell, Hanbury, Cooper and
// Buchanan, 2001, "A simple algorithm for identifying negated findings and diseases in discharge
// summaries"): a negation cue negates the words that follow it within a short window (NegEx used
// five terms), the window ends early at a scope terminator ("but", "except", a clause break), and
// pseudo-negations that contain a cue without negating anything ("no later than", "not only")
// are skipped. The cue lists are English and were written from general knowledge, not taken from
// NegEx's own lexicon. "without" and "unless" are left out on purpose: they open a condition
// ("refunds are paid without a receipt") rather than deny the sentence's main statement.

import { contentTokens, tokenize } from './words.js';

// Tokens are lower-cased with apostrophes removed, so "can't" arrives as "cant".
const CUES = new Set([
  'not', 'no', 'never', 'none', 'nobody', 'nothing', 'nowhere', 'neither', 'nor', 'cannot',
  'dont', 'doesnt', 'didnt', 'isnt', 'arent', 'wasnt', 'werent', 'cant', 'couldnt', 'wont', 'wouldnt',
  'shouldnt', 'mustnt', 'neednt', 'hasnt', 'havent', 'hadnt', 'shant', 'aint', 'mightnt',
]);

// Word sequences that start with a cue but do not negate ("no later than 28 days" = within 28 days).
const PSEUDO: readonly string[][] = [
  ['no', 'later', 'than'], ['not', 'later', 'than'], ['no', 'more', 'than'], ['not', 'more', 'than'],
  ['no', 'less', 'than'], ['not', 'less', 'than'], ['no', 'fewer', 'than'], ['no', 'longer', 'than'],
  ['not', 'only'], ['not', 'just'], ['no', 'matter'], ['no', 'doubt'], ['not', 'exceeding'], ['whether', 'or', 'not'],
  ['if', 'not'],
];

// Words that close a cue's scope: a new clause starts there.
const TERMINATORS = new Set(['but', 'however', 'although', 'though', 'except', 'unless', 'whereas', 'while', 'yet', 'which', 'who', 'apart', 'instead', 'otherwise']);

// NegEx's window: how many words after the cue it reaches.
const WINDOW = 5;

export interface Polarity {
  /** Content stems (numbers included) inside some negation scope. */
  negated: Set<string>;
  /** Content stems found outside every negation scope. */
  plain: Set<string>;
}

export function polarityOf(text: string): Polarity {
  const all = tokenize(text);
  const inScope = new Set<number>();
  for (let i = 0; i < all.length; i++) {
    const w = all[i]?.word ?? '';
    if (!CUES.has(w)) continue;
    if (PSEUDO.some((p) => p.every((x, k) => all[i + k]?.word === x))) continue;
    // The start of a pseudo-negation that begins one word earlier ("whether or not", "if not").
    if (PSEUDO.some((p) => p[1] === w && all[i - 1]?.word === p[0] && p.every((x, k) => all[i - 1 + k]?.word === x))) continue;
    // "No. 5" is a number sign.
    if (w === 'no' && /^\d/.test(all[i + 1]?.word ?? '')) continue;
    let reach = 0;
    for (let j = i + 1; j < all.length && reach < WINDOW; j++) {
      const gap = text.slice(all[j - 1]?.end ?? 0, all[j]?.start ?? 0);
      if (/[,;:.!?()]/.test(gap) || TERMINATORS.has(all[j]?.word ?? '')) break;
      inScope.add(j);
      reach++;
    }
  }
  const negated = new Set<string>();
  const plain = new Set<string>();
  const index = new Map(all.map((t, i) => [t.start, i]));
  for (const t of contentTokens(text)) {
    // The cue itself ("never") is polarity, not content.
    if (CUES.has(t.word)) continue;
    const i = index.get(t.start) ?? -1;
    (inScope.has(i) ? negated : plain).add(t.stem);
  }
  return { negated, plain };
}

/**
 * Stems of the claim whose polarity the evidence contradicts: negated in the claim but only
 * plain where the evidence has them, or plain in the claim but only negated there. Stems the
 * evidence lacks say nothing about polarity (the overlap check judges those).
 */
export function polarityConflicts(claim: Polarity, evidence: Polarity): string[] {
  const out: string[] = [];
  for (const s of claim.negated) {
    if (claim.plain.has(s)) continue;
    if (evidence.plain.has(s) && !evidence.negated.has(s)) out.push(s);
  }
  for (const s of claim.plain) {
    if (claim.negated.has(s)) continue;
    if (evidence.negated.has(s) && !evidence.plain.has(s)) out.push(s);
  }
  return out;
}
