// Turns a model reply, as it streams in, into checked answer sentences. A sentence is released
// only once it is complete (the next sentence has begun, or the reply has ended) and only if
// its cited sources support it. Each of its markers becomes a citation of the passage of that
// source that best supports this sentence, numbered 1..m by first use: two sentences backed by
// different passages of one source cite two numbers, so every number opens the words behind the
// sentence it follows. The released pieces, joined, are exactly the final answer. Unsupported
// sentences (too little overlap, a figure or a negation the passage does not state, planted text:
// see grounding.ts) never reach the caller's screen, but are reported as claims with
// `supported: false` and a `reason`.

import type { Citation } from '../types.js';
import { headingSet } from './abstain.js';
import { citationFor } from './cite.js';
import { claimSpans, createSupportScorer, supportingSpan, type GroundedClaim } from './grounding.js';
import { taintedSentences } from './planted.js';
import { isJunkSentence, splitSentences } from './sentences.js';
import type { ContextSource } from './types.js';

export interface ReleasedPiece {
  /** Text to append to what was released before (leading space included). */
  text: string;
  /** Citations first used by this piece. */
  citations: Citation[];
}

export interface ClaimStream {
  push(text: string): void;
  /** Flushes the last sentence; call once the reply is complete. */
  end(): void;
  /**
   * Every scored sentence so far, with `sources` in the answer's numbering. A shown sentence names
   * the citations of its own passages; an unsupported one names, per source, the citation of its
   * best passage if a shown sentence cites it, else the source's first citation (sources no shown
   * sentence cites are left out).
   */
  claims(): GroundedClaim[];
  citations(): Citation[];
  /** The released pieces joined. */
  answer(): string;
  /** Marker numbers that pointed at no source. */
  removed(): number[];
  raw(): string;
}

const LEADING_MARKERS = /^(?:\[\s*\d+(?:\s*[,;]\s*\d+)*\s*\]\s*)+/;
const PARTIAL_MARKER = /^\[[\d\s,;]*$/;
const MARKER_NUMBERS = /\[\s*(\d+(?:\s*[,;]\s*\d+)*)\s*\]/g;

export function createClaimStream(
  sources: ContextSource[],
  minSupport: number,
  onPiece: (p: ReleasedPiece) => void = () => undefined,
): ClaimStream {
  const score = createSupportScorer(sources, minSupport);
  const byN = new Map(sources.map((s) => [s.n, s]));
  let buffer = '';
  let released = 0;
  let answer = '';
  const claims: GroundedClaim[] = [];
  // For each claim, the passage (as a key) it leans on in each source it cites.
  const passages: { n: number; key: string }[][] = [];
  const citations: Citation[] = [];
  // Passage key ("source n:start:end") → its citation number; source n → its citation numbers.
  const numberOf = new Map<string, number>();
  const bySource = new Map<number, number[]>();

  /** The passage of source `n` that best supports the claim `text`, with the key that names it. */
  const passageFor = (n: number, text: string): { key: string; start: number; end: number } => {
    const source = byN.get(n) as ContextSource;
    const headings = headingSet(source);
    // A planted instruction and the sentences of its block are never a claim's quote.
    const spans = splitSentences(source.text);
    const tainted = taintedSentences(source.text, spans);
    const taintedText = new Set(spans.filter((_, i) => tainted[i]).map((x) => x.text));
    const quotable = (s: string): boolean => !isJunkSentence(s, headings) && !taintedText.has(s);
    const span = supportingSpan(source, text, quotable) ?? firstSentence(source, quotable);
    return { key: `${n}:${span.start}:${span.end}`, ...span };
  };

  const release = (spans: { text: string; markers: number[] }[]): void => {
    for (const span of spans) {
      const claim = score(span.text, span.markers);
      if (!claim) continue;
      claims.push(claim);
      const own = claim.sources.map((n) => ({ n, ...passageFor(n, claim.text) }));
      passages.push(own.map(({ n, key }) => ({ n, key })));
      if (!claim.supported) continue;
      const fresh: Citation[] = [];
      const numbers: number[] = [];
      for (const p of own) {
        let number = numberOf.get(p.key);
        if (number === undefined) {
          number = citations.length + 1;
          numberOf.set(p.key, number);
          bySource.set(p.n, [...(bySource.get(p.n) ?? []), number]);
          const cite = citationFor(byN.get(p.n) as ContextSource, p.start, p.end, number);
          fresh.push(cite);
          citations.push(cite);
        }
        if (!numbers.includes(number)) numbers.push(number);
      }
      const piece = `${answer.length > 0 ? ' ' : ''}${withMarkers(claim.text, numbers)}`;
      answer += piece;
      onPiece({ text: piece, citations: fresh });
    }
  };

  /** Claims of the text before the last sentence that has begun; those can no longer change. */
  const settled = (): { text: string; markers: number[] }[] => {
    const spans = splitSentences(buffer);
    for (let i = spans.length - 1; i > 0; i--) {
      const span = spans[i] as { text: string; start: number };
      const lead = LEADING_MARKERS.exec(span.text)?.[0].length ?? 0;
      // "[1" may be a marker still arriving: only words prove the next sentence has begun.
      const rest = span.text.slice(lead).replace(PARTIAL_MARKER, '');
      if (/[\p{L}\p{N}]/u.test(rest)) return claimSpans(buffer.slice(0, span.start + lead));
    }
    return [];
  };

  return {
    push(text) {
      buffer += text;
      const done = settled();
      release(done.slice(released));
      released = Math.max(released, done.length);
    },
    end() {
      const all = claimSpans(buffer);
      release(all.slice(released));
      released = all.length;
    },
    claims: () =>
      claims.map((c, i) => {
        const numbers: number[] = [];
        for (const { n, key } of passages[i] ?? []) {
          const number = numberOf.get(key) ?? (c.supported ? undefined : bySource.get(n)?.[0]);
          if (number !== undefined && !numbers.includes(number)) numbers.push(number);
        }
        return { ...c, sources: numbers };
      }),
    citations: () => citations,
    answer: () => answer,
    removed: () => {
      const out: number[] = [];
      for (const m of buffer.matchAll(MARKER_NUMBERS)) {
        for (const x of (m[1] ?? '').split(/[,;]/)) {
          const n = Number.parseInt(x.trim(), 10);
          if (Number.isFinite(n) && !byN.has(n) && !out.includes(n)) out.push(n);
        }
      }
      return out;
    },
    raw: () => buffer,
  };
}

/** "Claims take 28 days." with [1][2] → "Claims take 28 days [1][2]." */
export function withMarkers(text: string, numbers: number[]): string {
  const marks = numbers.map((n) => `[${n}]`).join('');
  const m = /[.!?]+$/.exec(text);
  return m ? `${text.slice(0, m.index)} ${marks}${m[0]}` : `${text} ${marks}`;
}

/** The quote when no sentence of the source shares a word with the claim: its first quotable sentence, else all of it. */
function firstSentence(source: ContextSource, quotable: (s: string) => boolean): { start: number; end: number } {
  const first = splitSentences(source.text).find((s) => quotable(s.text));
  if (first) return { start: first.start, end: first.end };
  const lead = source.text.length - source.text.trimStart().length;
  return { start: lead, end: source.text.trimEnd().length };
}
