import { describe, expect, it } from 'vitest';
import { findEffectiveDate, parseDateAt } from '../../src/ingest/effective-date.js';

describe('findEffectiveDate', () => {
  it('prefers front matter keys effective, effective_date, then date', () => {
    expect(findEffectiveDate('Effective from 1 May 2025.', { effective: '2026-03-01', date: '2020-01-01' })).toBe('2026-03-01');
    expect(findEffectiveDate('', { Effective_Date: '14 February 2026' })).toBe('2026-02-14');
    expect(findEffectiveDate('', { date: '2025-11-30', title: 'Fares' })).toBe('2025-11-30');
  });

  it('reads the phrases policies use', () => {
    expect(findEffectiveDate('This policy is effective from 1 March 2026 until replaced.', {})).toBe('2026-03-01');
    expect(findEffectiveDate('Effective date: 2026-03-01', {})).toBe('2026-03-01');
    expect(findEffectiveDate('Fares change, effective 01/03/2026.', {})).toBe('2026-03-01');
    expect(findEffectiveDate('These terms come into effect on 3rd April 2026.', {})).toBe('2026-04-03');
    expect(findEffectiveDate('Effective as of March 9, 2026', {})).toBe('2026-03-09');
    expect(findEffectiveDate('EFFECTIVE FROM: Monday 5 January 2026', {})).toBe('2026-01-05');
  });

  it('reads numeric dates day first', () => {
    expect(findEffectiveDate('effective 04.07.2026', {})).toBe('2026-07-04');
  });

  it('ignores dates without an effective phrase and impossible dates', () => {
    expect(findEffectiveDate('Printed on 1 March 2026.', {})).toBeNull();
    expect(findEffectiveDate('Effective from 31 February 2026.', {})).toBeNull();
    expect(findEffectiveDate('Effective immediately.', {})).toBeNull();
  });

  it('knows leap years (Gregorian rule: 2028 is one, 2100 is not)', () => {
    expect(parseDateAt('29 Feb 2028')).toBe('2028-02-29');
    expect(parseDateAt('29/02/2100')).toBeNull();
  });
});
