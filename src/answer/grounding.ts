// Checks a generated answer against its sources: citation markers must point at a source,
// and each sentence's content words should be found in the sources it cites.

import { coveredByParts } from './cite.js';
import { isPlantedInstruction } from './planted.js';
import { splitSentences } from './sentences.js';
import type { ContextSource } from './types.js';
import { contentStems, tokenize } from './words.js';

export interface GroundingOptions {
  /** A claim is supported when at least this share of its content words is in its cited sources (default 0.5). */
  minSupport?: number;
}

export interface GroundedClaim {
  /** The sentence without its citation markers. */
  text: string;
  sources: number[];
  supported: boolean;
  support: number;
}

export interface GroundingResult {
  /** The answer with markers that point at no source removed. */
  answer: string;
  /** Valid source numbers in order of first use. */
  cited: number[];
  /** Marker numbers that pointed at no source. */
  removed: number[];
  claims: GroundedClaim[];
}

// "[1]", "[1, 2]", "[1;2]"; consecutive markers "[1][2]" are matched one at a time.
const MARKER = /\[\s*(\d+(?:\s*[,;]\s*\d+)*)\s*\]/g;
const LEADING_MARKERS = /^(?:\[\s*\d+(?:\s*[,;]\s*\d+)*\s*\]\s*)+/;

export function checkGrounding(answer: string, sources: ContextSource[], opts: GroundingOptions = {}): GroundingResult {
  const minSupport = opts.minSupport ?? 0.5;
  const byN = new Map(sources.map((s) => [s.n, s]));
  const cited: number[] = [];
  const removed: number[] = [];

  const cleaned = answer
    .replace(/[^\S\n]*\[\s*(\d+(?:\s*[,;]\s*\d+)*)\s*\]/g, (whole: string, list: string) => {
      const nums = parseList(list);
      const valid = nums.filter((n) => byN.has(n));
      for (const n of nums) {
        if (byN.has(n)) {
          if (!cited.includes(n)) cited.push(n);
        } else if (!removed.includes(n)) {
          removed.push(n);
        }
      }
      if (valid.length === nums.length) return whole;
      if (valid.length === 0) return '';
      const lead = whole.slice(0, whole.length - whole.trimStart().length);
      return `${lead}${valid.map((n) => `[${n}]`).join('')}`;
    })
    .replace(/[^\S\n]+([.,;:!?])/g, '$1')
    .trim();

  const support = createSupportScorer(sources, minSupport);
  const claims: GroundedClaim[] = [];
  for (const { text, markers } of claimSpans(cleaned)) {
    const claim = support(text, markers);
    if (claim) claims.push(claim);
  }
  return { answer: cleaned, cited, removed, claims };
}

/** Rewrites every marker number through `mapping` (old → new); numbers not in it are dropped. */
export function renumberMarkers(answer: string, mapping: ReadonlyMap<number, number>): string {
  return answer
    .replace(/[^\S\n]*\[\s*(\d+(?:\s*[,;]\s*\d+)*)\s*\]/g, (whole: string, list: string) => {
      const mapped = parseList(list)
        .map((n) => mapping.get(n))
        .filter((n): n is number => n !== undefined);
      if (mapped.length === 0) return '';
      const lead = whole.slice(0, whole.length - whole.trimStart().length);
      return `${lead}${[...new Set(mapped)].map((n) => `[${n}]`).join('')}`;
    })
    .trim();
}

/**
 * Scores one claim against the sources it cites. Support is the share of the claim's content
 * words found in the best window of one or two adjacent sentences of each cited source (the
 * windows' words pooled across sources), so a claim cannot be assembled from scattered words
 * of a long passage. Sentences that try to instruct an automated reader support nothing:
 * a reply repeating a planted instruction must not count as grounded by it. A number in the
 * claim that its windows lack makes it unsupported, whatever the word overlap: a wrong
 * amount or deadline is the costliest mistake a support answer can make.
 */
export function createSupportScorer(
  sources: ContextSource[],
  minSupport: number,
): (text: string, markers: number[]) => GroundedClaim | null {
  const byN = new Map(sources.map((s) => [s.n, s]));
  const windowsOf = new Map<number, Set<string>[]>();
  const windows = (n: number): Set<string>[] => {
    let w = windowsOf.get(n);
    if (!w) {
      w = sentenceWindows(byN.get(n)?.text ?? '');
      windowsOf.set(n, w);
    }
    return w;
  };
  return (text, markers) => {
    const words = contentStems(text);
    if (words.size === 0) return null;
    const refs = [...new Set(markers)].filter((n) => byN.has(n));
    const pool = new Set<string>();
    for (const n of refs) {
      let best: Set<string> | null = null;
      let bestHits = -1;
      for (const win of windows(n)) {
        let hits = 0;
        for (const w of words) if (win.has(w)) hits++;
        if (hits > bestHits) {
          bestHits = hits;
          best = win;
        }
      }
      if (best) for (const w of best) pool.add(w);
    }
    let found = 0;
    for (const w of words) if (pool.has(w)) found++;
    const share = refs.length > 0 ? found / words.size : 0;
    const numbersHeld = numbersIn(text).every((x) => pool.has(x));
    return { text, sources: refs, supported: refs.length > 0 && share >= minSupport && numbersHeld, support: round3(share) };
  };
}

/**
 * The passage of a cited source that best supports one claim, as a span of `source.text`, so the
 * claim is shown beside the words that back it rather than whatever else its source says. Passages
 * are single sentences and pairs of adjacent sentences in one paragraph (the windows the support
 * check reads); the best holds most of the claim's figures, then most of its content words, then is
 * the shortest, so a pair wins only when its second sentence adds something the claim says. A
 * figure decides first because a claim about 10 days must not be shown with a 28-day sentence.
 * Sentences that `quotable` refuses (headings, table rules) and planted instructions are never
 * chosen. Null when no sentence shares a figure or a word with the claim.
 */
export function supportingSpan(
  source: ContextSource,
  claim: string,
  quotable: (sentence: string) => boolean = () => true,
): { start: number; end: number } | null {
  const words = contentStems(claim);
  const figures = new Set(numbersIn(claim));
  // Refused sentences stay in the list as gaps, so a pair never spans one.
  const sentences = splitSentences(source.text).map((s) =>
    quotable(s.text) && !isPlantedInstruction(s.text) ? { ...s, stems: new Set([...contentStems(s.text), ...numbersIn(s.text)]) } : null,
  );
  let best: { start: number; end: number; figures: number; words: number } | null = null;
  const consider = (start: number, end: number, stems: ReadonlySet<string>): void => {
    let f = 0;
    let w = 0;
    for (const x of figures) if (stems.has(x)) f++;
    for (const x of words) if (stems.has(x)) w++;
    if (f + w === 0) return;
    const better =
      !best || f > best.figures || (f === best.figures && (w > best.words || (w === best.words && end - start < best.end - best.start)));
    if (better) best = { start, end, figures: f, words: w };
  };
  sentences.forEach((cur, i) => {
    if (!cur) return;
    consider(cur.start, cur.end, cur.stems);
    const next = sentences[i + 1];
    const between = next ? source.text.slice(cur.end, next.start) : '';
    // A pair must read as one passage: same paragraph, and text the context really holds.
    if (next && !/\n\s*\n/.test(between) && coveredByParts(source, source.start + cur.start, source.start + next.end)) {
      consider(cur.start, next.end, new Set([...cur.stems, ...next.stems]));
    }
  });
  const found = best as { start: number; end: number } | null;
  return found ? { start: found.start, end: found.end } : null;
}

function sentenceWindows(text: string): Set<string>[] {
  const sentences = splitSentences(text)
    .filter((s) => !isPlantedInstruction(s.text))
    .map((s) => contentStems(s.text));
  const out: Set<string>[] = [];
  sentences.forEach((cur, i) => {
    out.push(cur);
    const next = sentences[i + 1];
    if (next) out.push(new Set([...cur, ...next]));
  });
  return out;
}

function numbersIn(text: string): string[] {
  return tokenize(text)
    .filter((t) => /\d/.test(t.word))
    .map((t) => t.stem);
}

/**
 * Answer sentences with the markers that belong to them. Sentence segmentation (UAX #29)
 * puts a marker written after the full stop ("... 28 days. [1]") at the start of the next
 * segment, so leading markers are handed back to the sentence before.
 */
export function claimSpans(answer: string): { text: string; markers: number[] }[] {
  const out: { text: string; markers: number[] }[] = [];
  for (const span of splitSentences(answer)) {
    let body = span.text;
    const lead = LEADING_MARKERS.exec(body);
    if (lead) {
      const prev = out[out.length - 1];
      if (prev) prev.markers.push(...markersIn(lead[0]));
      body = body.slice(lead[0].length);
    }
    const markers = markersIn(body);
    const text = body.replace(MARKER, '').replace(/[^\S\n]+([.,;:!?])/g, '$1').replace(/\s+/g, ' ').trim();
    // Nothing but markers: they were handed back above, or cite nothing said.
    if (text.length === 0) continue;
    out.push({ text, markers });
  }
  return out;
}

function markersIn(text: string): number[] {
  const out: number[] = [];
  for (const m of text.matchAll(MARKER)) out.push(...parseList(m[1] ?? ''));
  return out;
}

function parseList(list: string): number[] {
  return list
    .split(/[,;]/)
    .map((x) => Number.parseInt(x.trim(), 10))
    .filter((n) => Number.isFinite(n));
}

function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}
