import { describe, expect, it } from 'vitest';
import { contentStems, labelTokens, stem } from '../../src/answer/words.js';

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

describe('labelTokens', () => {
  it('joins a capital letter to the noun it labels, and only then', () => {
    expect(labelTokens('Passes for Zone B and Band C (high)').map((t) => t.word)).toEqual(['zone b', 'band c']);
    // "I" is a pronoun, "A" after a function word is an article, a letter on the next line is a bullet.
    expect(labelTokens('Can I claim a refund for A delay? Depots\nB')).toEqual([]);
  });

  it('makes "Zone A" a content term although "a" alone is a function word', () => {
    expect(contentStems('Is Zone A covered?')).toEqual(new Set([stem('zone'), `${stem('zone')} a`, stem('covered')]));
  });
});
