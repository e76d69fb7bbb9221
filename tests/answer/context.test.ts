import { describe, expect, it } from 'vitest';
import { citationFor } from '../../src/answer/cite.js';
import { buildContext } from '../../src/answer/context.js';
import { renderSource } from '../../src/answer/render.js';
import { DOCS, countWords, hitAt, hitBetween } from './fixtures.js';

const big = { budgetTokens: 10_000, countTokens: countWords };
const doc = DOCS.refund;

describe('buildContext', () => {
  it('merges overlapping chunks of one document into one exact span', () => {
    const a = hitAt(doc, 0, 120, { score: 0.3 });
    const b = hitAt(doc, 80, 260, { score: 0.7 });
    const out = buildContext([b, a], big);
    expect(out).toHaveLength(1);
    expect(out[0]).toMatchObject({ n: 1, start: 0, end: 260, score: 0.7 });
    expect(out[0]?.text).toBe(doc.text.slice(0, 260));
  });

  it('merges chunks that touch (end equals the next start)', () => {
    const out = buildContext([hitAt(doc, 0, 100), hitAt(doc, 100, 180)], big);
    expect(out).toHaveLength(1);
    expect(out[0]?.text).toBe(doc.text.slice(0, 180));
  });

  it('merges chunks two characters apart across the paragraph separator, keeping the exact text', () => {
    const first = hitBetween(doc, 'Delay Refunds Policy', 'Policy');
    const second = hitBetween(doc, 'Effective from', '2026.');
    expect(second.start - first.end).toBe(2);
    const out = buildContext([first, second], big);
    expect(out).toHaveLength(1);
    expect(out[0]?.text).toBe(doc.text.slice(first.start, second.end));
    expect(out[0]?.parts).toHaveLength(2);
  });

  it('keeps chunks three or more characters apart as separate sources', () => {
    const out = buildContext([hitAt(doc, 0, 100), hitAt(doc, 103, 180)], big);
    expect(out).toHaveLength(2);
  });

  it('does not merge chunks of different documents even at the same offsets', () => {
    const out = buildContext([hitAt(DOCS.refund, 0, 60), hitAt(DOCS.access, 0, 60)], big);
    expect(out).toHaveLength(2);
    expect(new Set(out.map((s) => s.documentId))).toEqual(new Set(['doc-refund', 'doc-access']));
  });

  it('orders sources by best fused score and numbers them 1..n', () => {
    const hits = [
      hitAt(DOCS.access, 0, 50, { score: 0.2 }),
      hitAt(DOCS.refund, 0, 50, { score: 0.9 }),
      hitAt(DOCS.oldRefund, 0, 40, { score: 0.5 }),
    ];
    const out = buildContext(hits, big);
    expect(out.map((s) => s.n)).toEqual([1, 2, 3]);
    expect(out.map((s) => s.documentId)).toEqual(['doc-refund', 'doc-refund-2025', 'doc-access']);
  });

  it('cites a quote on the page its first character is on, from the page breaks of the chunk it starts in', () => {
    const at = (s: string): number => doc.text.indexOf(s);
    // Chunk a runs from page 1 into page 2 (page 2 begins at "How to claim"); chunk b, merged with it, is on page 3.
    const a = hitAt(doc, 0, at('Each claim must'), { page: 1, pageEnd: 2, pageBreaks: [{ at: at('How to claim'), page: 2 }] });
    const b = hitAt(doc, at('Each claim must'), doc.text.length, { page: 3, pageEnd: 3 });
    const [s] = buildContext([a, b], big);
    const cite = (from: string, to: string): number | null => {
      const start = s!.text.indexOf(from);
      return citationFor(s!, start, s!.text.indexOf(to, start) + to.length, 1).page;
    };
    expect(cite('You can claim', 'timetable.')).toBe(1);
    expect(cite('Claims for delay refunds', 'journey.')).toBe(2);
    expect(cite('Compensation is paid', 'claim.')).toBe(3);
    // A quote that runs over the break is cited where it starts.
    expect(cite('For buses', 'journey.')).toBe(1);
  });

  it('falls back to the chunk\'s start page for chunks stored without page breaks', () => {
    const a = hitAt(doc, 0, doc.text.length, { page: 4, pageEnd: 5 });
    const [s] = buildContext([a], big);
    const start = s!.text.indexOf('Compensation is paid');
    expect(citationFor(s!, start, start + 20, 1).page).toBe(4);
  });

  it('keeps the best dense score, the best lexical rank and the page range of merged chunks', () => {
    const a = hitAt(doc, 0, 120, { page: 2, pageEnd: 2, denseScore: 0.4, ranks: { lexical: 5 } });
    const b = hitAt(doc, 100, 200, { page: 3, pageEnd: 4, denseScore: 0.6, ranks: { lexical: 2, dense: 1 } });
    const [s] = buildContext([a, b], big);
    expect(s).toMatchObject({ page: 2, pageEnd: 4, denseScore: 0.6, lexicalRank: 2 });
  });

  it('stops before the rendered blocks would exceed the token budget', () => {
    const hits = [
      hitAt(DOCS.refund, 0, 200, { score: 0.9 }),
      hitAt(DOCS.access, 0, 200, { score: 0.8 }),
      hitAt(DOCS.oldRefund, 0, 60, { score: 0.7 }),
    ];
    const all = buildContext(hits, big);
    const firstCost = countWords(renderSource(all[0]!));
    const secondCost = countWords(renderSource(all[1]!));
    const out = buildContext(hits, { budgetTokens: firstCost + secondCost - 1, countTokens: countWords });
    expect(out).toHaveLength(1);
    const used = out.reduce((sum, s) => sum + countWords(renderSource(s)), 0);
    expect(used).toBeLessThanOrEqual(firstCost + secondCost - 1);
    const exact = buildContext(hits, { budgetTokens: firstCost + secondCost, countTokens: countWords });
    expect(exact).toHaveLength(2);
  });

  it('cuts the first source to an exact prefix when even it does not fit', () => {
    const out = buildContext([hitAt(doc, 0, doc.text.length)], { budgetTokens: 30, countTokens: countWords });
    expect(out).toHaveLength(1);
    const s = out[0]!;
    expect(countWords(renderSource(s))).toBeLessThanOrEqual(30);
    expect(s.text).toBe(doc.text.slice(s.start, s.end));
    expect(s.end).toBeLessThan(doc.text.length);
  });

  it('returns nothing for no hits and honours maxSources', () => {
    expect(buildContext([], big)).toEqual([]);
    const hits = [hitAt(DOCS.refund, 0, 30), hitAt(DOCS.access, 0, 30), hitAt(DOCS.oldRefund, 0, 30)];
    expect(buildContext(hits, { ...big, maxSources: 2 })).toHaveLength(2);
  });
});
