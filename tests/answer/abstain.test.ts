import { describe, expect, it } from 'vitest';
import { ABSTAIN_TEXT, isAbstentionReply } from '../../src/answer/abstain.js';
import { CAUTION } from '../../src/answer/caution.js';

describe('fixed texts', () => {
  it('recognises the abstention sentence in a reply, but not an answer that cites sources', () => {
    expect(isAbstentionReply(ABSTAIN_TEXT)).toBe(true);
    expect(isAbstentionReply(`  ${ABSTAIN_TEXT.toUpperCase()}  `)).toBe(true);
    expect(isAbstentionReply(`${ABSTAIN_TEXT} But claims take 28 days [1].`)).toBe(false);
    expect(isAbstentionReply('Claims must be made within 28 days.')).toBe(false);
  });

  it('keeps the caution short: the cited documents, check the source, not advice, defer to rules, staff and professionals', () => {
    expect(CAUTION.split(/(?<=\.)\s+/).length).toBeLessThanOrEqual(3);
    expect(CAUTION).toMatch(/only from the cited documents/);
    expect(CAUTION).toMatch(/check the quoted source/);
    expect(CAUTION).toMatch(/not legal or medical advice/);
    expect(CAUTION).toMatch(/legal, medical, safety or HR decisions, defer to local rules and to the responsible staff or a licensed professional/);
  });
});
