// Checks a generated answer against its sources: citation markers must point at a source, and
// each sentence (claim) must be stated by the sources it cites. Word overlap alone is not enough:
// "Refunds are not paid within 14 days" shares every content word with "Refunds are paid within
// 14 days". So a claim is also checked for
//   - its figures: every amount, percentage, duration, time, date or count it states must be
//     stated by a sentence of its cited sources, and that sentence must be about the claim's
//     subject (figures.ts; comparing a generated statement's numbers with its evidence is common
//     practice in fact verification);
//   - its polarity: a word the claim negates must not appear only un-negated in the supporting
//     sentences, nor the reverse (negation.ts, after NegEx, Chapman et al. 2001);
//   - planted text: a claim that itself instructs an automated reader, or that only text planted
//     in a document backs, is never supported (planted.ts).

import { coveredByParts } from './cite.js';
import { figureStated, figuresIn, statedRanges, type Figure } from './figures.js';
import { polarityConflicts, polarityOf, type Polarity } from './negation.js';
import { isPlantedInstruction, taintedSentences } from './planted.js';
import { round3 } from '../numbers.js';
import { leansBack, splitSentences, tableHeader } from './sentences.js';
import type { ContextSource } from './types.js';
import { contentStems, contentTokens, tokenize } from './words.js';

export interface GroundingOptions {
  /** A claim is supported when at least this share of its content words is in its cited sources (default 0.5). */
  minSupport?: number;
}

/**
 * Why a claim is unsupported: it cites no existing source (`citation`), it instructs an automated
 * reader or repeats text planted in a document (`planted`), too few of its words are in its
 * cited passage (`overlap`), it states a figure its passage does not state about its subject
 * (`figure`), or it negates what the passage affirms or the reverse (`polarity`).
 */
export type ClaimReason = 'citation' | 'planted' | 'overlap' | 'figure' | 'polarity';

export interface GroundedClaim {
  /** The sentence without its citation markers. */
  text: string;
  sources: number[];
  supported: boolean;
  /** Share of the claim's content words found in its cited passage, 0..1. */
  support: number;
  /** Present on an unsupported claim: the first check it failed. */
  reason?: ClaimReason;
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

interface SourceSentence {
  stems: Set<string>;
  /** Stems of the sentence plus what it leans on: its table's header row, or the sentence before when it opens with "This", "They" ... */
  context: Set<string>;
  figures: Figure[];
  ranges: [number, number][];
  polarity: Polarity;
}

interface SourceModel {
  /** Sentences that may support a claim: not planted and not next to a planted one. */
  clean: SourceSentence[];
  /** Windows of one or two adjacent clean sentences, as indexes into `clean`. */
  windows: number[][];
  /** Stems of each planted or tainted sentence. */
  tainted: Set<string>[];
}

function modelSource(text: string): SourceModel {
  const spans = splitSentences(text);
  const taint = taintedSentences(text, spans);
  const clean: SourceSentence[] = [];
  const tainted: Set<string>[] = [];
  const windows: number[][] = [];
  let prevClean = -2;
  spans.forEach((span, i) => {
    if (taint[i]) {
      tainted.push(contentStems(span.text));
      return;
    }
    const stems = contentStems(span.text);
    const context = new Set([...stems, ...contentStems(tableHeader(text, span))]);
    const before = clean[clean.length - 1];
    if (before && prevClean === i - 1 && leansBack(span.text)) for (const w of before.stems) context.add(w);
    const k = clean.length;
    clean.push({ stems, context, figures: figuresIn(span.text), ranges: statedRanges(span.text), polarity: polarityOf(span.text) });
    windows.push([k]);
    // Only sentences adjacent in the source form a window, never two either side of a removed one.
    if (prevClean === i - 1) windows.push([k - 1, k]);
    prevClean = i;
  });
  return { clean, windows, tainted };
}

/**
 * Scores one claim against the sources it cites. Support is the share of the claim's content
 * words found in the best window of one or two adjacent sentences of each cited source (the
 * windows' words pooled across sources), so a claim cannot be assembled from scattered words
 * of a long passage. On top of that share, the claim's figures, polarity and planted text are
 * checked (see the file comment); the first failed check is the claim's `reason`.
 */
export function createSupportScorer(
  sources: ContextSource[],
  minSupport: number,
): (text: string, markers: number[]) => GroundedClaim | null {
  const byN = new Map(sources.map((s) => [s.n, s]));
  const models = new Map<number, SourceModel>();
  const model = (n: number): SourceModel => {
    let m = models.get(n);
    if (!m) {
      m = modelSource(byN.get(n)?.text ?? '');
      models.set(n, m);
    }
    return m;
  };
  return (text, markers) => {
    const words = contentStems(text);
    if (words.size === 0) return null;
    const refs = [...new Set(markers)].filter((n) => byN.has(n));
    const unsupported = (support: number, reason: ClaimReason): GroundedClaim => ({ text, sources: refs, supported: false, support: round3(support), reason });
    if (refs.length === 0) return unsupported(0, 'citation');

    // The best window of each cited source; their words are pooled.
    const pool = new Set<string>();
    const evidence: SourceSentence[] = [];
    const cited = refs.map(model);
    for (const m of cited) {
      let best: number[] = [];
      let bestHits = -1;
      for (const win of m.windows) {
        const hits = coverage(words, new Set(win.flatMap((k) => [...(m.clean[k]?.stems ?? [])])));
        if (hits > bestHits) {
          bestHits = hits;
          best = win;
        }
      }
      for (const k of best) {
        const sentence = m.clean[k] as SourceSentence;
        evidence.push(sentence);
        for (const w of sentence.stems) pool.add(w);
      }
    }
    const share = coverage(words, pool);

    if (isPlantedInstruction(text)) return unsupported(share, 'planted');
    const failed: ClaimReason | null = share < minSupport ? 'overlap' : !figuresHeld(text, cited, minSupport) ? 'figure' : null;
    if (failed) {
      // Better backed by a planted block than by the clean text: the claim repeats the planted text.
      const echo = cited.some((m) => m.tainted.some((t) => coverage(words, t) >= minSupport && coverage(words, t) > share));
      return unsupported(share, echo ? 'planted' : failed);
    }
    const evidencePolarity: Polarity = { negated: new Set(), plain: new Set() };
    for (const e of evidence) {
      for (const w of e.polarity.negated) evidencePolarity.negated.add(w);
      for (const w of e.polarity.plain) evidencePolarity.plain.add(w);
    }
    if (polarityConflicts(polarityOf(text), evidencePolarity).length > 0) return unsupported(share, 'polarity');
    return { text, sources: refs, supported: true, support: round3(share) };
  };
}

function coverage(words: ReadonlySet<string>, have: ReadonlySet<string>): number {
  let n = 0;
  for (const w of words) if (have.has(w)) n++;
  return words.size > 0 ? n / words.size : 0;
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

/** Number tokens of a text, as stems: what a claim's figures are matched on when choosing its quote. */
function numbersIn(text: string): string[] {
  return tokenize(text)
    .filter((t) => /\d/.test(t.word))
    .map((t) => t.stem);
}

// Words that end a claim's subject: auxiliaries, modals and the common verbs of policy text
// ("Refunds take ...", "A day ticket costs ..."). Written from general knowledge of English.
const VERB_MARKERS = new Set(
  (
    'is are was were be been being am must may might can cannot could will would shall should has have had ' +
    'do does did need needs not never take takes cost costs get gets pay pays run runs last lasts open opens ' +
    'close closes apply applies cover covers include includes allow allows require requires'
  ).split(' '),
);

// Where a claim's clauses meet: each figure is checked with the clause it sits in.
const CLAUSE_BREAK = /[,;:]|\s(?:and|but|or|while|whereas|although|then)\s/gi;

/**
 * Every code of the claim is written in its cited sources, and every figure is stated by one clean sentence of its cited sources, and that
 * sentence is about what the figure's clause is about: it holds at least half of the clause's
 * subject words (the content words before its verb) and at least `minSupport` of the clause's
 * content words. So "Umbrellas are kept for 30 days" is not backed by "Other items are kept for
 * 30 days. Umbrellas are kept for 7 days.", although each of its words and figures is there.
 */
function figuresHeld(claim: string, cited: SourceModel[], minSupport: number): boolean {
  const figures = figuresIn(claim);
  const tokens = tokenize(claim);
  const inFigure = (start: number): boolean => figures.some((f) => start >= f.start && start < f.end);
  // Codes that mix letters and digits ("T2R", "A12") name one thing: the passage must write them.
  const codes = tokens.filter((t) => /\d/.test(t.word) && /\p{L}/u.test(t.word) && !inFigure(t.start));
  if (!codes.every((c) => cited.some((m) => m.clean.some((s) => s.stems.has(c.stem))))) return false;
  if (figures.length === 0) return true;
  const content = contentTokens(claim);
  const breaks = [0, ...[...claim.matchAll(CLAUSE_BREAK)].map((m) => m.index), claim.length];
  return figures.every((f) => {
    const from = Math.max(...breaks.filter((b) => b <= f.start));
    const to = Math.min(...breaks.filter((b) => b > f.start));
    let clause = content.filter((t) => t.start >= from && t.start < to && !inFigure(t.start));
    let clauseTokens = tokens.filter((t) => t.start >= from && t.start < to);
    // "..., within 28 days": a clause with nothing but the figure takes the whole claim's words.
    if (clause.length === 0) {
      clause = content.filter((t) => !inFigure(t.start));
      clauseTokens = tokens;
    }
    const stems = new Set(clause.map((t) => t.stem));
    const verb = clauseTokens.find((t) => VERB_MARKERS.has(t.word));
    const subjectEnd = verb ? verb.start : f.start;
    const subject = new Set(clause.filter((t) => t.start < subjectEnd).map((t) => t.stem));
    return cited.some((m) =>
      m.clean.some((s) => {
        if (!figureStated(f, s.figures, s.ranges)) return false;
        const subjectHits = [...subject].filter((w) => s.context.has(w)).length;
        if (subjectHits * 2 < subject.size) return false;
        return stems.size === 0 || coverage(stems, s.context) >= minSupport;
      }),
    );
  });
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
