import { describe, expect, it } from 'vitest';
import { polarityConflicts, polarityOf } from '../../src/answer/negation.js';

// Scope rules after NegEx (Chapman et al. 2001): a cue negates a short window of following words,
// cut at a terminator; pseudo-negations are skipped.
describe('polarityOf', () => {
  it('negates the words after a cue, up to a clause break or terminator', () => {
    const p = polarityOf('Refunds are not paid within 14 days, but vouchers are issued.');
    expect([...p.negated].sort()).toEqual(['14', 'day', 'paid', 'within']);
    expect(p.plain.has('refund')).toBe(true);
    expect(p.plain.has('voucher')).toBe(true);
  });

  it('reads contractions and "no" as a determiner', () => {
    expect(polarityOf("Dogs can't ride on the upper deck.").negated.has('rid')).toBe(true);
    expect(polarityOf('No refunds are paid for delays under 15 minutes.').negated.has('refund')).toBe(true);
  });

  it('skips pseudo-negations and "No." as a number sign', () => {
    expect(polarityOf('Claims must arrive no later than 28 days after the journey.').negated.size).toBe(0);
    expect(polarityOf('Refunds are not only paid by card.').negated.size).toBe(0);
    expect(polarityOf('See form No. 5 for details.').negated.size).toBe(0);
  });

  it('leaves "without" and "unless" to the overlap check: they set conditions, not polarity', () => {
    expect(polarityOf('Refunds are paid without a receipt unless the ticket was free.').negated.size).toBe(0);
  });
});

describe('polarityConflicts', () => {
  it('finds a claim that negates what the evidence affirms, and the reverse', () => {
    const evidence = polarityOf('Refunds are paid within 14 days.');
    expect(polarityConflicts(polarityOf('Refunds are not paid within 14 days.'), evidence)).toContain('paid');
    expect(polarityConflicts(polarityOf('Bicycles are allowed on buses.'), polarityOf('Bicycles are not allowed on buses.'))).toContain('allow');
  });

  it('accepts matching polarity and says nothing about words the evidence lacks', () => {
    expect(polarityConflicts(polarityOf('Dogs must not be left alone.'), polarityOf('Dogs must not be left alone on board.'))).toEqual([]);
    expect(polarityConflicts(polarityOf('Cash is never accepted.'), polarityOf('Refunds are paid by card.'))).toEqual([]);
  });
});
