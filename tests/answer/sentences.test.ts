import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { isJunkSentence, splitSentences } from '../../src/answer/sentences.js';
import { REFUND_DOC } from './fixtures.js';

describe('splitSentences', () => {
  it('returns trimmed spans that are exact slices of the input', () => {
    // Property check over arbitrary strings, including line breaks and stray punctuation.
    fc.assert(
      fc.property(fc.string({ unit: fc.constantFrom('a', 'B', ' ', '.', '\n', '?', 'e.g.', 'Dr. ', '|') , maxLength: 80 }), (text) => {
        for (const s of splitSentences(text)) {
          expect(text.slice(s.start, s.end)).toBe(s.text);
          expect(s.text).toBe(s.text.trim());
          expect(s.text.length).toBeGreaterThan(0);
        }
      }),
    );
  });

  it('breaks at full stops and line breaks as UAX #29 sentence boundaries do', () => {
    const spans = splitSentences('Claims take 28 days. Pay is by transfer.\nNext line');
    expect(spans.map((s) => s.text)).toEqual(['Claims take 28 days.', 'Pay is by transfer.', 'Next line']);
  });

  it('does not end a sentence after a common abbreviation', () => {
    const spans = splitSentences('Bring proof, e.g. a receipt, to the office. Ask Dr. Vell for help.');
    expect(spans.map((s) => s.text)).toEqual(['Bring proof, e.g. a receipt, to the office.', 'Ask Dr. Vell for help.']);
  });
});

describe('isJunkSentence', () => {
  it('flags table separators, heading lines and known headings but keeps prose and table rows', () => {
    expect(isJunkSentence('|---|---|')).toBe(true);
    expect(isJunkSentence('## How to claim')).toBe(true);
    expect(isJunkSentence('How to claim', new Set(['how to claim']))).toBe(true);
    expect(isJunkSentence('Compensation Bands')).toBe(true);
    expect(isJunkSentence('Claims for delay refunds must be made within 28 days of the journey.')).toBe(false);
    expect(isJunkSentence('| 30 to 59 minutes | 50% of the single fare |')).toBe(false);
  });

  it('leaves every prose sentence of the refund fixture in place', () => {
    const kept = splitSentences(REFUND_DOC).filter((s) => !isJunkSentence(s.text, new Set(['how to claim', 'when you can claim'])));
    expect(kept.map((s) => s.text)).toContain('Compensation is paid within 10 working days of a valid claim.');
    expect(kept.map((s) => s.text)).not.toContain('How to claim');
    expect(kept.map((s) => s.text)).not.toContain('|---|---|');
  });
});
