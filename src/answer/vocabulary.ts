// A collection's own vocabulary: which words its documents use, how many of their lines hold each
// stem, and a misspelling-tolerant lookup of a word the collection does not use.
//
// The lookup is symmetric-delete spelling correction (Garbe, 2012): every vocabulary word is
// indexed under each string made by deleting up to two of its characters; a query word's own
// deletes are looked up there, and candidates are confirmed by their true Damerau–Levenshtein
// distance (Damerau 1964; the optimal-string-alignment variant). Lookups cost a few hash probes
// instead of a scan of the vocabulary.

import { findAbbreviations, type Abbreviation } from './abbreviations.js';
import { contentTokens, labelTokens, tokenize } from './words.js';

export interface Vocabulary {
  /** Lines (paragraphs, list items, table rows) in the collection. */
  readonly lines: number;
  /** Lines holding the stem. */
  df(stem: string): number;
  /** True when some document uses the surface word. */
  hasWord(word: string): boolean;
  /**
   * Vocabulary words within the allowed edit distance of `word` (1 for words of up to 5 letters,
   * 2 beyond), nearest first, then the most used; empty for a word the collection uses itself.
   */
  corrections(word: string): { word: string; stem: string; distance: number }[];
  /** Abbreviations the documents define ("time off in lieu (TOIL)"), each pair once. */
  readonly abbreviations: readonly Abbreviation[];
  /** Every surface word the documents use. */
  words(): IterableIterator<string>;
}

// Shorter words have too many neighbours at any distance to correct safely.
const MIN_CORRECTABLE = 4;
const maxDistance = (len: number): number => (len <= 5 ? 1 : 2);

/** Builds the vocabulary of the given document texts. */
export function buildVocabulary(texts: Iterable<string>): Vocabulary {
  const df = new Map<string, number>();
  const words = new Map<string, { stem: string; count: number }>();
  let lines = 0;
  const abbreviations = new Map<string, Abbreviation>();
  for (const text of texts) {
    for (const a of findAbbreviations(text)) abbreviations.set(`${a.short}\u0000${a.long}`, a);
    for (const line of text.split(/\n+/)) {
      if (!/[\p{L}\p{N}]/u.test(line)) continue;
      lines++;
      const seen = new Set<string>();
      const tokens = tokenize(line);
      for (const t of [...tokens, ...labelTokens(line, tokens)]) {
        const w = words.get(t.word);
        if (w) w.count++;
        else words.set(t.word, { stem: t.stem, count: 1 });
        if (!seen.has(t.stem)) {
          seen.add(t.stem);
          df.set(t.stem, (df.get(t.stem) ?? 0) + 1);
        }
      }
    }
  }
  const deletes = new Map<string, string[]>();
  for (const word of words.keys()) {
    if (word.length < MIN_CORRECTABLE || /[\d ]/.test(word)) continue;
    for (const d of deleteVariants(word, maxDistance(word.length))) {
      const list = deletes.get(d);
      if (list) list.push(word);
      else deletes.set(d, [word]);
    }
  }
  const cache = new Map<string, { word: string; stem: string; distance: number }[]>();
  return {
    lines,
    abbreviations: [...abbreviations.values()],
    df: (stem) => df.get(stem) ?? 0,
    hasWord: (word) => words.has(word.toLowerCase()),
    words: () => words.keys(),
    corrections(raw) {
      const word = raw.toLowerCase();
      if (words.has(word) || word.length < MIN_CORRECTABLE || /\d/.test(word)) return [];
      const hit = cache.get(word);
      if (hit) return hit;
      const limit = maxDistance(word.length);
      const found = new Map<string, number>();
      for (const d of deleteVariants(word, limit)) {
        for (const cand of deletes.get(d) ?? []) {
          if (found.has(cand)) continue;
          const dist = osaDistance(word, cand);
          if (dist <= Math.min(limit, maxDistance(cand.length))) found.set(cand, dist);
        }
      }
      const out = [...found]
        .map(([w, distance]) => ({ word: w, stem: words.get(w)?.stem ?? w, distance, count: words.get(w)?.count ?? 0 }))
        .sort((a, b) => a.distance - b.distance || b.count - a.count)
        .map(({ word: w, stem, distance }) => ({ word: w, stem, distance }));
      cache.set(word, out);
      return out;
    },
  };
}

/** The word itself and every string made by deleting up to `n` characters. */
export function deleteVariants(word: string, n: number): Set<string> {
  const out = new Set<string>([word]);
  let frontier = [word];
  for (let step = 0; step < n; step++) {
    const next: string[] = [];
    for (const w of frontier) {
      for (let i = 0; i < w.length; i++) {
        const d = w.slice(0, i) + w.slice(i + 1);
        if (!out.has(d)) {
          out.add(d);
          next.push(d);
        }
      }
    }
    frontier = next;
  }
  return out;
}

/** Optimal string alignment distance: insertions, deletions, substitutions and adjacent transpositions. */
export function osaDistance(a: string, b: string): number {
  const m = a.length;
  const n = b.length;
  const d: number[][] = Array.from({ length: m + 1 }, (_, i) => {
    const row = new Array<number>(n + 1).fill(0);
    row[0] = i;
    return row;
  });
  for (let j = 0; j <= n; j++) d[0]![j] = j;
  for (let i = 1; i <= m; i++) {
    for (let j = 1; j <= n; j++) {
      const cost = a[i - 1] === b[j - 1] ? 0 : 1;
      let v = Math.min(d[i - 1]![j]! + 1, d[i]![j - 1]! + 1, d[i - 1]![j - 1]! + cost);
      if (i > 1 && j > 1 && a[i - 1] === b[j - 2] && a[i - 2] === b[j - 1]) v = Math.min(v, d[i - 2]![j - 2]! + 1);
      d[i]![j] = v;
    }
  }
  return d[m]![n]!;
}

/** Content stems of a text that the vocabulary never uses. */
export function unknownStems(text: string, vocab: Vocabulary): string[] {
  return contentTokens(text)
    .filter((t) => vocab.df(t.stem) === 0)
    .map((t) => t.stem);
}
