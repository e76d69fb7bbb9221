import { describe, expect, it } from 'vitest';
import { figureStated, figuresIn, statedRanges, type Figure } from '../../src/answer/figures.js';

const one = (text: string): Figure => {
  const f = figuresIn(text);
  expect(f).toHaveLength(1);
  return f[0] as Figure;
};

describe('figuresIn', () => {
  it('reads each kind of figure with its comparable value', () => {
    expect(one('a fee of £5')).toMatchObject({ kind: 'money', value: 5, unit: '£' });
    expect(one('only 50p')).toMatchObject({ kind: 'money', value: 0.5, unit: '£' });
    expect(one('20% off')).toMatchObject({ kind: 'percent', value: 20 });
    expect(one('within 10 working days')).toMatchObject({ kind: 'duration', value: 10, unit: 'day', qualifier: 'working' });
    expect(one('for two weeks')).toMatchObject({ kind: 'duration', value: 14, raw: 2, unit: 'day' });
    expect(one('from 9.30am')).toMatchObject({ kind: 'time', value: 9 * 60 + 30 });
    expect(one('until 5pm')).toMatchObject({ kind: 'time', value: 17 * 60 });
    expect(one('on 1 March 2026')).toMatchObject({ kind: 'date', value: 301, year: 2026 });
    expect(one('since 2025')).toMatchObject({ kind: 'year', value: 2025 });
    expect(one('on the 22nd')).toMatchObject({ kind: 'number', value: 22 });
  });

  it('reads written numbers as digits, but not "one" used as a pronoun', () => {
    expect(one('within fourteen days')).toMatchObject({ kind: 'duration', value: 14 });
    expect(one('within twenty-eight days')).toMatchObject({ kind: 'duration', value: 28 });
    expect(one('for one week')).toMatchObject({ kind: 'duration', value: 7 });
    expect(figuresIn('the one on the left')).toEqual([]);
  });

  it('does not read a decimal as a time, the verb "may" as a month, or a route code as a count', () => {
    expect(one('costs £2.20')).toMatchObject({ kind: 'money', value: 2.2 });
    expect(one('Item 3 may be refused')).toMatchObject({ kind: 'number', value: 3 });
    expect(figuresIn('on route T2')).toEqual([]);
  });
});

describe('figureStated', () => {
  const stated = (text: string, claim: string): boolean => figureStated(one(claim), figuresIn(text), statedRanges(text));

  it('matches equal values written differently', () => {
    expect(stated('A fee of £5.00 applies.', '£5')).toBe(true);
    expect(stated('Refunds take 14 days.', 'fourteen days')).toBe(true);
    expect(stated('Refunds take 14 days.', 'two weeks')).toBe(true);
    expect(stated('The office closes at 17:00.', '5pm')).toBe(true);
  });

  it('rejects a changed figure, unit or qualifier', () => {
    expect(stated('Refunds take 14 days.', '45 days')).toBe(false);
    expect(stated('Refunds take 14 days.', '14 weeks')).toBe(false);
    expect(stated('A fee of £5.00 applies.', '€5')).toBe(false);
    expect(stated('Refunds take 14 days.', '14 working days')).toBe(false);
  });

  it('accepts a value inside a stated range and a bare number under a unit heading', () => {
    expect(stated('| 30 to 59 minutes | 50% of the single fare |', '35 minutes')).toBe(true);
    expect(stated('| 30 to 59 minutes | 50% of the single fare |', '65 minutes')).toBe(false);
    expect(stated('| Day Rider | 14 |', '14 days')).toBe(true);
  });
});
