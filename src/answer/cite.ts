// Turning a span of a context source into a Citation that points into the document.

import type { Citation } from '../types.js';
import type { ContextSource, SourcePart } from './types.js';

/**
 * A citation for source.text.slice(localStart, localEnd). Offsets become document offsets, and
 * page/section come from the merged chunk the quote starts in. The page is the one the quote's
 * first character is printed on, found from the page breaks recorded inside that chunk: a reader
 * opening the document there finds the quote's opening words. A quote that runs over a page break
 * is cited on the page where it starts (the page it continues on follows it in any viewer).
 * Chunks stored before page breaks were recorded fall back to the page the chunk starts on.
 */
export function citationFor(source: ContextSource, localStart: number, localEnd: number, n: number): Citation {
  const start = source.start + localStart;
  const end = source.start + localEnd;
  const part = partAt(source, start);
  return {
    n,
    documentId: source.documentId,
    source: source.source,
    title: source.title,
    page: (part ? pageAt(part, start) : null) ?? source.page,
    section: part?.section || source.section,
    quote: source.text.slice(localStart, localEnd),
    start,
    end,
    effectiveDate: source.effectiveDate,
    version: source.version ?? null,
  };
}

function partAt(source: ContextSource, docOffset: number): SourcePart | undefined {
  return source.parts.find((p) => docOffset >= p.start && docOffset < p.end);
}

/** The page of document offset `at` inside `part`: its start page, moved on by each break at or before `at`. */
export function pageAt(part: SourcePart, at: number): number | null {
  let page = part.page;
  for (const b of part.pageBreaks ?? []) {
    if (b.at > at) break;
    page = b.page;
  }
  return page;
}

/** True when every character of the document span [start, end) lies inside one of the merged chunks. */
export function coveredByParts(source: ContextSource, start: number, end: number): boolean {
  if (source.parts.length === 0) return true;
  let pos = start;
  const parts = [...source.parts].sort((a, b) => a.start - b.start);
  for (const p of parts) {
    if (p.start > pos) break;
    if (p.end > pos) pos = p.end;
    if (pos >= end) return true;
  }
  return pos >= end;
}
