import { describe, expect, it } from 'vitest';
import { contentStems, stem } from '../../src/answer/words.js';

describe('stem', () => {
  it('brings inflected forms of one word together', () => {
    // Expected groupings written from ordinary English morphology (from memory), not a reference stemmer.
    expect(new Set(['refund', 'refunds', 'refunded', 'refunding'].map(stem)).size).toBe(1);
    expect(new Set(['charge', 'charges', 'charged', 'charging'].map(stem)).size).toBe(1);
    expect(new Set(['delay', 'delays', 'delayed'].map(stem)).size).toBe(1);
    expect(new Set(['policy', 'policies'].map(stem)).size).toBe(1);
    expect(stem('stopping')).toBe(stem('stop'));
  });

  it('leaves numbers and short words alone', () => {
    expect(stem('2026')).toBe('2026');
    expect(stem('bus')).toBe('bus');
    expect(stem('15th')).toBe('15th');
  });
});

describe('contentStems', () => {
  it('drops function words and the quantifier after "how"', () => {
    expect(contentStems('How long do I have to claim a refund?')).toEqual(new Set(['claim', 'refund']));
  });

  it('keeps "long" when it is not asked as "how long"', () => {
    expect(contentStems('long journeys')).toContain('long');
  });
});
