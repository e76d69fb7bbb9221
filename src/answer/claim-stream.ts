// Turns a model reply, as it streams in, into checked answer sentences. A sentence is released
// only once it is complete (the next sentence has begun, or the reply has ended) and only if
// its cited sources support it; its citation numbers are renumbered 1..m by first use, so the
// released pieces, joined, are exactly the final answer. Unsupported sentences (too little
// overlap, a figure or a negation the passage does not state, planted text: see grounding.ts)
// never reach the caller's screen, but are reported as claims with `supported: false` and a `reason`.

import type { Citation } from '../types.js';
import { headingSet } from './abstain.js';
import { citationFor } from './cite.js';
import { claimSpans, createSupportScorer, type GroundedClaim } from './grounding.js';
import { taintedSentences } from './planted.js';
import { isJunkSentence, splitSentences } from './sentences.js';
import type { ContextSource } from './types.js';
import { contentStems } from './words.js';

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
  /** Every scored sentence so far, with `sources` in the answer's numbering (sources no shown sentence cites are left out). */
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
  const citations: Citation[] = [];
  const mapping = new Map<number, number>();

  const release = (spans: { text: string; markers: number[] }[]): void => {
    for (const span of spans) {
      const claim = score(span.text, span.markers);
      if (!claim) continue;
      claims.push(claim);
      if (!claim.supported) continue;
      const fresh: Citation[] = [];
      for (const n of claim.sources) {
        if (mapping.has(n)) continue;
        const next = mapping.size + 1;
        mapping.set(n, next);
        const source = byN.get(n) as ContextSource;
        const span = bestSpan(source, contentStems(claim.text));
        const cite = citationFor(source, span.start, span.end, next);
        fresh.push(cite);
        citations.push(cite);
      }
      const numbers = claim.sources.map((n) => mapping.get(n) as number);
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
    // In the answer's numbering; an unsupported claim keeps only sources a supported one also cites.
    claims: () => claims.map((c) => ({ ...c, sources: c.sources.flatMap((n) => (mapping.has(n) ? [mapping.get(n) as number] : [])) })),
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

/** The sentence of `source` sharing most content words with the claim, as a local span. */
export function bestSpan(source: ContextSource, want: ReadonlySet<string>): { start: number; end: number } {
  const headings = headingSet(source);
  let best: { start: number; end: number } | null = null;
  let bestHits = -1;
  const spans = splitSentences(source.text);
  const tainted = taintedSentences(source.text, spans);
  for (const [i, s] of spans.entries()) {
    if (isJunkSentence(s.text, headings) || tainted[i]) continue;
    let hits = 0;
    for (const w of contentStems(s.text)) if (want.has(w)) hits++;
    if (hits > bestHits) {
      bestHits = hits;
      best = { start: s.start, end: s.end };
    }
  }
  if (best) return best;
  const lead = source.text.length - source.text.trimStart().length;
  return { start: lead, end: source.text.trimEnd().length };
}
