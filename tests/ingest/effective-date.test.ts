import { describe, expect, it } from 'vitest';
import { findEffectiveDate, findVersion, parseDateAt, withVersion } from '../../src/ingest/effective-date.js';

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

describe('findVersion', () => {
  it('prefers front matter keys version, revision, then issue', () => {
    expect(findVersion('Version 1.0', { Version: '2026.2', issue: '7' })).toBe('2026.2');
    expect(findVersion('', { issue: '7' })).toBe('7');
  });

  it('reads a version or issue label at a line start or after a separator', () => {
    expect(findVersion('Fares and Tickets\nVersion 3.1\nThese fares apply.', {})).toBe('3.1');
    expect(findVersion('Staff Handbook - Issue 4', {})).toBe('4');
    expect(findVersion('Document version: 2.0b', {})).toBe('2.0b');
    expect(findVersion('Lost property | Revision 12', {})).toBe('12');
    expect(findVersion('Policy v. text\nVersion v5', {})).toBe('5');
  });

  it('reads a lower-case issue clause such as the demo PDFs carry, and takes the earliest statement', () => {
    expect(findVersion('Effective from 1 January 2026.\nDocument code MVT-HR-014, issue 3. Owner: People Team.', {})).toBe('3');
    expect(findVersion('Staff Handbook, issue 3.\nVersion 9', {})).toBe('3');
    expect(findVersion('Version 9\nStaff Handbook, issue 3.', {})).toBe('9');
  });

  it('ignores the words inside ordinary sentences', () => {
    expect(findVersion('Drivers issue 2 tickets per child. The version 3 form is gone.', {})).toBeNull();
    expect(findVersion('On busy days, issue 2 tickets at most; revision 4 forms are gone.', {})).toBeNull();
    expect(findVersion('Refunds are paid within 14 days.', {})).toBeNull();
  });

  it('adds the version to metadata only when the metadata lacks one', () => {
    expect(withVersion({ title: 'Fares' }, 'Version 3')).toEqual({ title: 'Fares', version: '3' });
    expect(withVersion({ version: '9' }, 'Version 3')).toEqual({ version: '9' });
    expect(withVersion({}, 'no label here')).toEqual({});
  });
});
