import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { chunkDocument } from '../../src/ingest/chunk.js';
import { buildNormalisedDocument } from '../../src/ingest/normalise.js';
import { splitSentences } from '../../src/ingest/sentences.js';
import type { Block, ChunkDraft, NormalisedDocument, TokenCounter } from '../../src/types.js';

// Test counters: whitespace words (the brief's simple counter) and a character-based one that
// makes single long words exceed small limits, so the grapheme-cut path runs too.
const words: TokenCounter = (t) => t.split(/\s+/).filter(Boolean).length;
const chars: TokenCounter = (t) => Math.ceil([...t].length / 6);

const WORDS = [
  'fare', 'refund', 'tram', 'bus', 'delay', 'Marrowgate', 'Valley', 'ticket', 'pass', 'the', 'of', 'a',
  'within', 'minutes', '3.5', 'km', '£2.40', 'e.g.', 'Dr.', 'café', 'Fahrkarte', 'z. B.', '時刻表', '🚋',
  'Straßenbahnhaltestellenanzeigetafel', 'naïve', 'résumé', '—', '(see', 'below)', '“quoted”',
];
const word = fc.constantFrom(...WORDS);
const sentence = fc
  .tuple(fc.array(word, { minLength: 1, maxLength: 18 }), fc.constantFrom('.', '!', '?', '', '。'))
  .map(([ws, end]) => ws.join(' ') + end);
const blockArb: fc.Arbitrary<Block> = fc.oneof(
  { weight: 2, arbitrary: fc.tuple(fc.integer({ min: 1, max: 4 }), fc.array(word, { minLength: 1, maxLength: 6 })).map(([level, ws]): Block => ({ kind: 'heading', level, text: ws.join(' ') })) },
  { weight: 5, arbitrary: fc.array(sentence, { minLength: 1, maxLength: 10 }).map((ss): Block => ({ kind: 'paragraph', text: ss.join(' ') })) },
  { weight: 1, arbitrary: fc.array(fc.array(word, { minLength: 1, maxLength: 4 }), { minLength: 1, maxLength: 12 }).map((rows): Block => ({ kind: 'table', text: rows.map((r) => r.join(' | ')).join('\n') })) },
  { weight: 1, arbitrary: fc.array(sentence, { minLength: 1, maxLength: 8 }).map((items): Block => ({ kind: 'list', text: items.map((i) => `- ${i}`).join('\n') })) },
  { weight: 1, arbitrary: fc.array(sentence, { minLength: 1, maxLength: 5 }).map((lines): Block => ({ kind: 'code', text: lines.join('\n') })) },
);
const docArb = fc.array(blockArb, { minLength: 1, maxLength: 25 }).map(buildNormalisedDocument);
const optsArb = fc
  .tuple(fc.integer({ min: 4, max: 80 }), fc.integer({ min: 0, max: 40 }), fc.integer({ min: 0, max: 20 }))
  .map(([target, extra, overlap]) => ({ targetTokens: target, maxTokens: target + extra, overlapTokens: overlap }));

function checkInvariants(doc: NormalisedDocument, chunks: ChunkDraft[], count: TokenCounter, max: number): void {
  const covered = new Uint8Array(doc.text.length);
  chunks.forEach((c, i) => {
    expect(c.ordinal).toBe(i);
    expect(c.text).toBe(doc.text.slice(c.start, c.end));
    expect(c.text.trim()).toBe(c.text);
    expect(c.tokenCount).toBe(count(c.text));
    expect(c.tokenCount).toBeLessThanOrEqual(max);
    covered.fill(1, c.start, c.end);
  });
  for (let i = 0; i < doc.text.length; i++) {
    if (!/\s/.test(doc.text[i]!) && covered[i] !== 1) {
      throw new Error(`character ${i} (${JSON.stringify(doc.text[i])}) is in no chunk`);
    }
  }
}

describe('chunkDocument properties', () => {
  it('maps every chunk back to its exact text, covers all non-whitespace and stays under maxTokens (word counter)', () => {
    fc.assert(
      fc.property(docArb, optsArb, (doc, opts) => {
        const chunks = chunkDocument(doc, { ...opts, countTokens: words });
        checkInvariants(doc, chunks, words, opts.maxTokens);
      }),
      { numRuns: 300 },
    );
  });

  it('keeps the same invariants when single words exceed the limit (character counter)', () => {
    fc.assert(
      fc.property(docArb, optsArb, (doc, opts) => {
        const chunks = chunkDocument(doc, { ...opts, countTokens: chars });
        checkInvariants(doc, chunks, chars, opts.maxTokens);
      }),
      { numRuns: 200 },
    );
  });

  it('never lets body text precede a heading inside one chunk', () => {
    fc.assert(
      fc.property(docArb, optsArb, (doc, opts) => {
        const chunks = chunkDocument(doc, { ...opts, countTokens: words });
        for (const h of doc.blocks.filter((b) => b.kind === 'heading')) {
          for (const c of chunks.filter((x) => x.start < h.start && h.start < x.end)) {
            const before = doc.blocks.filter((b) => b.start >= c.start && b.end <= h.start);
            expect(before.every((b) => b.kind === 'heading')).toBe(true);
          }
        }
      }),
      { numRuns: 200 },
    );
  });

  it('keeps every table row and sentence that fits maxTokens whole inside some chunk', () => {
    fc.assert(
      fc.property(docArb, optsArb, (doc, opts) => {
        const chunks = chunkDocument(doc, { ...opts, countTokens: words });
        for (const b of doc.blocks) {
          const units =
            b.kind === 'paragraph'
              ? splitSentences(b.text).map((s) => ({ start: b.start + s.start, end: b.start + s.end }))
              : [...b.text.matchAll(/[^\n]+/g)].map((m) => ({ start: b.start + m.index, end: b.start + m.index + m[0].length }));
          for (const u of units) {
            if (words(doc.text.slice(u.start, u.end)) > opts.maxTokens) continue;
            expect(chunks.some((c) => c.start <= u.start && u.end <= c.end)).toBe(true);
          }
        }
      }),
      { numRuns: 200 },
    );
  });
});

describe('chunkDocument structure', () => {
  const policy = buildNormalisedDocument([
    { kind: 'heading', level: 1, text: 'Delay Refunds', page: 1 },
    { kind: 'heading', level: 2, text: 'Who can claim', page: 1 },
    { kind: 'paragraph', text: 'Passengers delayed by 15 minutes or more can claim. Claims close after 28 days.', page: 1 },
    { kind: 'heading', level: 2, text: 'How much', page: 2 },
    {
      kind: 'paragraph',
      text: 'A delay of 15 to 29 minutes earns a quarter of the fare. A delay of 30 to 59 minutes earns half. Longer delays earn the full fare back. Season tickets are paid pro rata.',
      page: 2,
    },
    { kind: 'table', text: 'Delay | Refund\n15–29 min | 25%\n30–59 min | 50%\n60+ min | 100%', page: 3 },
  ]);

  it('starts a chunk at each section heading and gives it that section path', () => {
    const chunks = chunkDocument(policy, { targetTokens: 200, maxTokens: 256, overlapTokens: 0, countTokens: words });
    expect(chunks.map((c) => c.text.split('\n')[0])).toEqual(['Delay Refunds', 'How much']);
    expect(chunks[0]!.headingPath).toEqual(['Delay Refunds', 'Who can claim']);
    expect(chunks[1]!.headingPath).toEqual(['Delay Refunds', 'How much']);
    expect([chunks[1]!.pageStart, chunks[1]!.pageEnd]).toEqual([2, 3]);
    expect([chunks[0]!.pageStart, chunks[0]!.pageEnd]).toEqual([1, 1]);
  });

  it('splits an oversized paragraph at sentence ends and overlaps within the section only', () => {
    const chunks = chunkDocument(policy, { targetTokens: 20, maxTokens: 24, overlapTokens: 10, countTokens: words });
    const howMuch = chunks.filter((c) => c.headingPath.at(-1) === 'How much');
    expect(howMuch.length).toBeGreaterThan(1);
    for (const c of howMuch.slice(1)) {
      // Continuation chunks start on a sentence or row start, never mid-sentence.
      expect(c.text).toMatch(/^(A delay|Longer|Season|Delay \||15–29|30–59|60\+)/);
    }
    expect(howMuch[1]!.text.startsWith('A delay of 30 to 59 minutes earns half.')).toBe(true);
    // The first chunk of a section starts at its heading and repeats nothing from the section before.
    expect(howMuch[0]!.text.startsWith('How much')).toBe(true);
  });

  it('repeats the previous chunk\'s last whole sentence when it fits the overlap budget', () => {
    const chunks = chunkDocument(policy, { targetTokens: 20, maxTokens: 24, overlapTokens: 13, countTokens: words });
    const howMuch = chunks.filter((c) => c.headingPath.at(-1) === 'How much');
    const firstSentence = 'A delay of 15 to 29 minutes earns a quarter of the fare.';
    expect(howMuch[0]!.text).toBe(`How much\n\n${firstSentence}`);
    expect(howMuch[1]!.text.startsWith(`${firstSentence} A delay of 30 to 59 minutes earns half.`)).toBe(true);
    expect(howMuch[1]!.start).toBeLessThan(howMuch[0]!.end);
    // Nothing from "Who can claim" leaks into the next section.
    expect(howMuch[0]!.start).toBe(policy.text.indexOf('How much'));
  });

  it('cuts a single sentence longer than maxTokens between words', () => {
    const long = Array.from({ length: 30 }, (_, i) => `stop${i}`).join(' ') + '.';
    const doc = buildNormalisedDocument([{ kind: 'paragraph', text: long }]);
    const chunks = chunkDocument(doc, { targetTokens: 8, maxTokens: 10, overlapTokens: 0, countTokens: words });
    expect(chunks.map((c) => c.tokenCount)).toEqual([10, 10, 10]);
    expect(chunks[1]!.text.startsWith('stop10 ')).toBe(true);
  });

  it('cuts a 100,000-character run without spaces quickly, keeping accents on their letters', () => {
    // Regression: splitting such a run with Intl.Segmenter's grapheme iterator took minutes.
    const run = 'e\u0301'.repeat(50_000);
    const doc = buildNormalisedDocument([{ kind: 'paragraph', text: run }]);
    const perFour: TokenCounter = (t) => Math.ceil(t.length / 4) + 2;
    const chunks = chunkDocument(doc, { targetTokens: 200, maxTokens: 256, overlapTokens: 16, countTokens: perFour });
    expect(chunks.map((c) => c.text).join('')).toBe(doc.text);
    expect(chunks.every((c) => c.tokenCount <= 256 && !/^\p{M}/u.test(c.text))).toBe(true);
  });

  it('starts a chunk on the page of its first character and records the pages that begin inside it', () => {
    const first = 'Gates open at dawn and close at dusk every day of the year.';
    const second = 'Keys are returned to the warden on leaving.';
    const runOn = `${first} ${second}`;
    const doc = buildNormalisedDocument([
      { kind: 'heading', level: 1, text: 'Site rules', page: 1 },
      // A paragraph that runs over from page 1 to page 2 (the loader records where page 2 begins).
      { kind: 'paragraph', text: runOn, page: 1, pageEnd: 2, pageBreaks: [{ at: runOn.indexOf(second), page: 2 }] },
      { kind: 'paragraph', text: 'Bonfires are allowed in November only.', page: 3 },
    ]);
    const whole = chunkDocument(doc, { targetTokens: 200, maxTokens: 256, overlapTokens: 0, countTokens: words });
    expect(whole).toHaveLength(1);
    expect([whole[0]!.pageStart, whole[0]!.pageEnd]).toEqual([1, 3]);
    expect(whole[0]!.pageBreaks).toEqual([
      { at: doc.text.indexOf(second), page: 2 },
      { at: doc.text.indexOf('Bonfires'), page: 3 },
    ]);
    // Cut small, the chunk that starts with the page-2 sentence starts on page 2, not on its paragraph's page.
    const small = chunkDocument(doc, { targetTokens: 10, maxTokens: 14, overlapTokens: 0, countTokens: words });
    const onTwo = small.find((c) => c.text.startsWith('Keys are returned'))!;
    expect([onTwo.pageStart, onTwo.pageEnd, onTwo.pageBreaks]).toEqual([2, 2, []]);
  });

  it('gives unpaged documents null pages', () => {
    const doc = buildNormalisedDocument([{ kind: 'paragraph', text: 'Bikes ride free off-peak.' }]);
    const [c] = chunkDocument(doc, { targetTokens: 50, maxTokens: 60, overlapTokens: 5, countTokens: words });
    expect(c).toMatchObject({ pageStart: null, pageEnd: null, pageBreaks: [], headingPath: [], ordinal: 0 });
  });

  it('refuses a limit too small to hold one character', () => {
    const doc = buildNormalisedDocument([{ kind: 'paragraph', text: 'Fare.' }]);
    const plusTwo: TokenCounter = (t) => [...t].length + 2;
    expect(() => chunkDocument(doc, { targetTokens: 2, maxTokens: 2, overlapTokens: 0, countTokens: plusTwo })).toThrow(/too small/);
  });

  it('returns no chunks for an empty document', () => {
    expect(chunkDocument(buildNormalisedDocument([]), { targetTokens: 10, maxTokens: 10, overlapTokens: 2, countTokens: words })).toEqual([]);
  });
});
