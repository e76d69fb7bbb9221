// Content-word handling shared by the extractive answerer, the grounding check and the
// evidence test. Deliberately light: the aim is to notice that "refunded" and "refunds" are
// the same word, not to be a full morphological analyser.

// A short English function-word list, written from memory in the spirit of the SMART stop
// list (Salton, 1971); it only needs to remove words that carry no topic.
const STOPWORDS = new Set(
  (
    'a about above after again against all also am an and any are as at be because been before being below ' +
    'between both but by can could did do does doing done down during each either else ever few for from ' +
    'further get gets got had has have having he her here hers herself him himself his how i if in into is it ' +
    'its itself just let me might more most must my myself no nor not now of off on once only or other our ours ' +
    'ourselves out over please same shall she should so some such than that the their theirs them themselves ' +
    'then there these they this those through to too under until up upon us very was we were what whats when ' +
    'where whether which while who whom whose why will with would yes yet you your yours yourself yourselves ' +
    'dont doesnt cant wont isnt arent im ive id youre theyre thats'
  ).split(' '),
);

// Question openers whose following word is about the form of the answer, not its topic:
// "how long", "how much", "how many", "how often", "how soon".
const HOW_QUANTIFIERS = new Set(['long', 'much', 'many', 'often', 'soon', 'far']);

const WORD_RE = /[\p{L}\p{N}]+(?:['’][\p{L}]+)*/gu;

export interface WordToken {
  /** Lower-cased surface form. */
  word: string;
  stem: string;
  start: number;
  end: number;
}

/** Every word of `text` with its offsets, lower-cased and stemmed. */
export function tokenize(text: string): WordToken[] {
  const out: WordToken[] = [];
  for (const m of text.matchAll(WORD_RE)) {
    const word = m[0].toLowerCase().replace(/['’]/g, '');
    out.push({ word, stem: stem(word), start: m.index, end: m.index + m[0].length });
  }
  return out;
}

export function isStopword(word: string): boolean {
  return STOPWORDS.has(word.replace(/['’]/g, ''));
}

/** Tokens that carry topic: not function words, and not the quantifier after "how". */
export function contentTokens(text: string): WordToken[] {
  const all = tokenize(text);
  const labels = labelTokens(text, all);
  const words = all.filter((t, i) => {
    if (isStopword(t.word)) return false;
    if (HOW_QUANTIFIERS.has(t.word) && all[i - 1]?.word === 'how') return false;
    // Single letters are list bullets or initials, not topic, except a capital letter that labels
    // the noun before it ("Band B", "Form C", "Zone A"), which is what tells rows apart.
    return t.word.length > 1 || /\p{N}/u.test(t.word);
  });
  return labels.length === 0 ? words : [...words, ...labels].sort((a, b) => a.start - b.start);
}

/**
 * A capital letter that labels the noun before it ("Band B", "Form C", "Zone A") as one token
 * "band b": the pair is what tells rows apart, while the letter alone is a bullet, an initial or
 * an article. Not "I", and only with a content word straight before it on the same line.
 */
export function labelTokens(text: string, all: WordToken[] = tokenize(text)): WordToken[] {
  const out: WordToken[] = [];
  for (let i = 1; i < all.length; i++) {
    const t = all[i]!;
    const prev = all[i - 1]!;
    if (t.word.length !== 1 || t.word === 'i' || !/^\p{Lu}$/u.test(text.slice(t.start, t.end))) continue;
    if (isStopword(prev.word) || prev.word.length < 2 || /\p{N}/u.test(prev.word)) continue;
    if (!/^[^\S\n]+$/.test(text.slice(prev.end, t.start))) continue;
    out.push({ word: `${prev.word} ${t.word}`, stem: `${prev.stem} ${t.word}`, start: prev.start, end: t.end });
  }
  return out;
}

/** Distinct content stems of `text`. */
export function contentStems(text: string): Set<string> {
  return new Set(contentTokens(text).map((t) => t.stem));
}

/**
 * A light suffix stripper: plural and verb endings, -ly, then a final "e" so that
 * "charge", "charges", "charged" and "charging" meet at "charg". Numbers are kept whole.
 */
export function stem(word: string): string {
  let w = word.toLowerCase();
  if (/\p{N}/u.test(w) || w.length <= 3) return w;
  if (w.endsWith('ies') && w.length > 4) w = `${w.slice(0, -3)}y`;
  else if (w.endsWith('ied') && w.length > 4) w = `${w.slice(0, -3)}y`;
  else if (w.endsWith('sses')) w = w.slice(0, -2);
  else if (/(?:x|z|ch|sh|ss)es$/.test(w)) w = w.slice(0, -2);
  else if (w.endsWith('s') && !/(?:ss|us|is)$/.test(w)) w = w.slice(0, -1);
  else if (w.endsWith('ing') && w.length > 5) w = undouble(w.slice(0, -3));
  else if (w.endsWith('ed') && w.length > 4) w = undouble(w.slice(0, -2));
  else if (w.endsWith('ly') && w.length > 5) w = w.slice(0, -2);
  if (w.endsWith('e') && w.length > 3) w = w.slice(0, -1);
  return w;
}

function undouble(w: string): string {
  // "stopping" -> "stopp" -> "stop"; keep "ll"/"ss" which are usually part of the root.
  return /([bdfgmnprt])\1$/.test(w) ? w.slice(0, -1) : w;
}
