import { describe, expect, it } from 'vitest';
import { CAUTION } from '../../src/answer/caution.js';
import { footnote, sectionLabel, ticketText } from '../../src/web/ticket.js';
import type { Citation } from '../../src/web/types.js';

const cite = (n: number, over: Partial<Citation> = {}): Citation => ({
  n,
  documentId: `d${n}`,
  source: `doc${n}.md`,
  title: `Document ${n}`,
  page: null,
  section: `Document ${n} > Part ${n}`,
  quote: 'q',
  start: 0,
  end: 1,
  effectiveDate: null,
  ...over,
});

describe('copy for a ticket', () => {
  it('renumbers citations in order of first use and lists one footnote each', () => {
    const text = ticketText({
      answer: 'Claims close after 28 days [3]. Send the form by post [1]. Late claims are refused [3, 1].',
      abstained: false,
      citations: [cite(1, { title: 'Delay Refunds', section: 'Delay Refunds > How to claim', effectiveDate: '2026-02-01' }), cite(3, { title: 'Depot Safety', section: 'Depot Safety > Section 4 > Claims', page: 7 })],
      caution: CAUTION,
    });
    expect(text).toBe(
      'Claims close after 28 days [1]. Send the form by post [2]. Late claims are refused [1, 2].\n\n' +
        'Sources:\n' +
        '[1] Depot Safety, section "Section 4 > Claims", page 7\n' +
        '[2] Delay Refunds, section "How to claim", effective 2026-02-01\n\n' +
        CAUTION,
    );
  });

  it('ends with the caution the answer came with, which says it is not legal or medical advice', () => {
    const text = ticketText({ answer: 'Found items are kept for 30 days [1].', abstained: false, citations: [cite(1)], caution: CAUTION });
    expect(text.endsWith(`\n\n${CAUTION}`)).toBe(true);
    expect(text).toContain('not legal or medical advice');
  });

  it('gives an abstention as its plain sentence, without a sources list', () => {
    expect(ticketText({ answer: 'The documents do not cover this question. ', abstained: true, citations: [], caution: CAUTION })).toBe('The documents do not cover this question.');
  });

  it('leaves a marker alone when it names no citation', () => {
    expect(ticketText({ answer: 'See clause [9].', abstained: false, citations: [cite(1)], caution: CAUTION })).toBe(`See clause [9].\n\n${CAUTION}`);
  });

  it('drops a heading path that only repeats the title', () => {
    expect(sectionLabel('Lost Property', 'Lost Property')).toBe('');
    expect(footnote(2, { title: 'Lost Property', section: 'Lost Property', page: null, effectiveDate: null })).toBe('[2] Lost Property');
  });
});
