// Invented Marrowgate Valley Transit policy text, in the normalised form the ingest stage
// produces (blocks joined by "\n\n", headings as plain lines), and helpers to cut hits from it.

import type { Embedder } from '../../src/embed/types.js';
import type { SearchHit } from '../../src/types.js';

export const REFUND_DOC = [
  'Delay Refunds Policy',
  'Effective from 1 March 2026.',
  'When you can claim',
  'You can claim a delay refund if your bus or tram arrives at your destination stop at least 15 minutes later than it should. For buses, the delay is measured against the published timetable.',
  'How to claim',
  'Claims for delay refunds must be made within 28 days of the journey. Each claim must include the ticket number and the date, time and route of the journey. Compensation is paid within 10 working days of a valid claim.',
  '| Delay at destination | Compensation |',
  '|---|---|',
  '| 30 to 59 minutes | 50% of the single fare |',
].join('\n\n');

export const ACCESS_DOC = [
  'Accessibility and Assistance',
  'Assistance dogs',
  'Guide dogs and assistance dogs travel free on all services. They must stay on a lead and off the seats.',
  'Lost property',
  'Items found on trams and buses are kept at the Marrowgate Central lost property office for 30 days. Umbrellas are kept for 7 days only.',
  'Bikes on board',
  'Folding bicycles may be carried on all services if folded. Full-size bicycles are allowed on trams outside weekday peak hours.',
].join('\n\n');

export const OLD_REFUND_DOC = [
  'Delay Refunds Policy (2025)',
  'Claims for delay refunds must be made within 14 days of the journey.',
].join('\n\n');

export interface DocFixture {
  id: string;
  text: string;
  title: string;
  effectiveDate: string | null;
}

export const DOCS: Record<'refund' | 'access' | 'oldRefund', DocFixture> = {
  refund: { id: 'doc-refund', text: REFUND_DOC, title: 'Delay Refunds Policy', effectiveDate: '2026-03-01' },
  access: { id: 'doc-access', text: ACCESS_DOC, title: 'Accessibility and Assistance', effectiveDate: null },
  oldRefund: { id: 'doc-refund-2025', text: OLD_REFUND_DOC, title: 'Delay Refunds Policy (2025)', effectiveDate: '2025-04-01' },
};

let nextChunkId = 1;

/** A hit for doc.text.slice(start, end). */
export function hitAt(doc: DocFixture, start: number, end: number, extra: Partial<SearchHit> = {}): SearchHit {
  return {
    chunkId: nextChunkId++,
    documentId: doc.id,
    source: `policies/${doc.id}.md`,
    title: doc.title,
    page: null,
    pageEnd: null,
    section: doc.title,
    headingPath: [doc.title],
    text: doc.text.slice(start, end),
    start,
    end,
    effectiveDate: doc.effectiveDate,
    score: 0.5,
    ranks: {},
    ...extra,
  };
}

/** A hit running from the first occurrence of `from` to the end of the first `to` after it. */
export function hitBetween(doc: DocFixture, from: string, to: string, extra: Partial<SearchHit> = {}): SearchHit {
  const start = doc.text.indexOf(from);
  if (start < 0) throw new Error(`fixture text not found: ${from}`);
  const toAt = doc.text.indexOf(to, start);
  if (toAt < 0) throw new Error(`fixture text not found: ${to}`);
  return hitAt(doc, start, toAt + to.length, extra);
}

/** Whole-document hit. */
export function wholeDoc(doc: DocFixture, extra: Partial<SearchHit> = {}): SearchHit {
  return hitAt(doc, 0, doc.text.length, extra);
}

/** Whitespace word counter, standing in for a tokenizer. */
export const countWords = (s: string): number => s.split(/\s+/).filter(Boolean).length;

/**
 * A test embedder over hand-made concepts: words listed together share one dimension, so
 * "bike" and "bicycle" embed alike. Other words get their own dimension by a string hash.
 * It stands in for a sentence-embedding model without any model files.
 */
export function conceptEmbedder(groups: string[][], dims = 256): Embedder {
  const concept = new Map<string, number>();
  groups.forEach((g, i) => g.forEach((w) => concept.set(w, i)));
  const dimOf = (w: string): number => {
    const c = concept.get(w);
    if (c !== undefined) return c;
    let h = 2166136261;
    for (const ch of w) h = Math.imul(h ^ ch.charCodeAt(0), 16777619) >>> 0;
    return groups.length + (h % (dims - groups.length));
  };
  return {
    id: 'test-concepts',
    dimensions: dims,
    semantic: true,
    maxTokens: 512,
    countTokens: countWords,
    async embed(texts: string[]): Promise<Float32Array[]> {
      return texts.map((t) => {
        const v = new Float32Array(dims);
        for (const w of t.toLowerCase().match(/[a-z0-9]+/g) ?? []) {
          if (STOP.has(w)) continue;
          v[dimOf(w)] = (v[dimOf(w)] ?? 0) + 1;
        }
        const norm = Math.hypot(...v) || 1;
        return v.map((x) => x / norm);
      });
    },
  };
}

const STOP = new Set(['a', 'an', 'the', 'is', 'are', 'be', 'to', 'of', 'on', 'in', 'if', 'and', 'or', 'for', 'my', 'i', 'can', 'may', 'all', 'do', 'at', 'it']);
