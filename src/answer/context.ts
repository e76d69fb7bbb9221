// The context window: retrieval hits de-duplicated into numbered sources under a token budget.

import type { SearchHit } from '../types.js';
import { renderSource } from './render.js';
import type { ContextSource, SourcePart } from './types.js';

export interface BuildContextOptions {
  budgetTokens: number;
  countTokens: (s: string) => number;
  /** At most this many sources (default 8). */
  maxSources?: number;
}

// Chunks a couple of characters apart are neighbours split at a block boundary (blocks are
// joined by "\n\n" and chunk edges are trimmed), so they read best as one passage.
const ADJACENT_GAP = 2;
const DEFAULT_MAX_SOURCES = 8;

type Unnumbered = Omit<ContextSource, 'n'>;

/**
 * Merges overlapping or adjacent chunks of one document into one exact span, orders the
 * result by best fused score, numbers it 1..n and stops before the rendered blocks would
 * exceed the budget. If even the first source does not fit, a prefix of it that does is used,
 * so that a non-empty hit list never yields an empty context.
 */
export function buildContext(hits: SearchHit[], opts: BuildContextOptions): ContextSource[] {
  return fitContext(hits, opts).sources;
}

/** The context window and the tokens its rendered blocks use, counted with `opts.countTokens`. */
export function fitContext(hits: SearchHit[], opts: BuildContextOptions): { sources: ContextSource[]; tokens: number } {
  const maxSources = opts.maxSources ?? DEFAULT_MAX_SOURCES;
  const merged = mergeHits(hits);
  merged.sort((a, b) => b.score - a.score || a.documentId.localeCompare(b.documentId) || a.start - b.start);

  const out: ContextSource[] = [];
  let used = 0;
  for (const m of merged) {
    if (out.length >= maxSources) break;
    const candidate: ContextSource = { ...m, n: out.length + 1 };
    const cost = opts.countTokens(renderSource(candidate));
    if (used + cost <= opts.budgetTokens) {
      out.push(candidate);
      used += cost;
      continue;
    }
    if (out.length === 0) {
      const cut = fitPrefix(candidate, opts.budgetTokens, opts.countTokens);
      if (cut) {
        out.push(cut);
        used = opts.countTokens(renderSource(cut));
      }
    }
    break;
  }
  return { sources: out, tokens: used };
}

/** Groups hits by document and merges overlapping/adjacent spans. Output order is arbitrary. */
export function mergeHits(hits: SearchHit[]): Unnumbered[] {
  const byDoc = new Map<string, SearchHit[]>();
  for (const h of hits) {
    const list = byDoc.get(h.documentId);
    if (list) list.push(h);
    else byDoc.set(h.documentId, [h]);
  }
  const out: Unnumbered[] = [];
  for (const list of byDoc.values()) {
    list.sort((a, b) => a.start - b.start || b.end - a.end);
    let cur: Unnumbered | null = null;
    for (const h of list) {
      if (cur && h.start <= cur.end + ADJACENT_GAP) {
        absorb(cur, h);
      } else {
        if (cur) out.push(cur);
        cur = fromHit(h);
      }
    }
    if (cur) out.push(cur);
  }
  return out;
}

function partOf(h: SearchHit): SourcePart {
  const part: SourcePart = { start: h.start, end: h.end, page: h.page, pageEnd: h.pageEnd, section: h.section };
  if (h.pageBreaks && h.pageBreaks.length > 0) part.pageBreaks = h.pageBreaks;
  return part;
}

function fromHit(h: SearchHit): Unnumbered {
  const part = partOf(h);
  const s: Unnumbered = {
    documentId: h.documentId,
    source: h.source,
    title: h.title,
    page: h.page,
    pageEnd: h.pageEnd ?? h.page,
    section: h.section,
    text: h.text,
    start: h.start,
    end: h.end,
    effectiveDate: h.effectiveDate,
    version: h.version ?? null,
    score: h.score,
    parts: [part],
  };
  if (h.denseScore !== undefined) s.denseScore = h.denseScore;
  if (h.ranks.lexical !== undefined) s.lexicalRank = h.ranks.lexical;
  return s;
}

function absorb(cur: Unnumbered, h: SearchHit): void {
  if (h.end > cur.end) {
    if (h.start <= cur.end) {
      cur.text += h.text.slice(cur.end - h.start);
    } else {
      // A one- or two-character gap between chunks is the block separator the chunker
      // trimmed; it is whitespace in the normalised text, and sentence splitting breaks at
      // line ends, so quotes never include these filler characters.
      cur.text += '\n'.repeat(h.start - cur.end) + h.text;
    }
    cur.end = h.end;
  }
  cur.score = Math.max(cur.score, h.score);
  if (h.denseScore !== undefined) cur.denseScore = Math.max(cur.denseScore ?? -Infinity, h.denseScore);
  if (h.ranks.lexical !== undefined) cur.lexicalRank = Math.min(cur.lexicalRank ?? Infinity, h.ranks.lexical);
  if (h.page !== null) {
    cur.page = cur.page === null ? h.page : Math.min(cur.page, h.page);
    const hEnd = h.pageEnd ?? h.page;
    cur.pageEnd = cur.pageEnd === null ? hEnd : Math.max(cur.pageEnd, hEnd);
  }
  cur.parts.push(partOf(h));
}

/** Longest prefix (cut at whitespace) whose rendered block fits the budget, or null. */
function fitPrefix(s: ContextSource, budget: number, count: (t: string) => number): ContextSource | null {
  const fits = (len: number): boolean => count(renderSource({ ...s, text: s.text.slice(0, len) })) <= budget;
  let lo = 0;
  let hi = s.text.length;
  while (lo < hi) {
    const mid = Math.ceil((lo + hi) / 2);
    if (fits(mid)) lo = mid;
    else hi = mid - 1;
  }
  let len = lo;
  const lastSpace = s.text.slice(0, len + 1).search(/\s\S*$/);
  if (len < s.text.length && lastSpace > 0) len = lastSpace;
  const text = s.text.slice(0, len).trimEnd();
  if (text.length === 0) return null;
  return { ...s, text, end: s.start + text.length, parts: s.parts.filter((p) => p.start < s.start + text.length) };
}
