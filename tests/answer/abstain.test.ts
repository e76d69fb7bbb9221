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

  it('keeps the caution short and about checking sources and deferring to responsible staff', () => {
    expect(CAUTION.split(/(?<=\.)\s+/).length).toBeLessThanOrEqual(2);
    expect(CAUTION).toMatch(/check/i);
    expect(CAUTION).toMatch(/legal, medical, safety or HR/);
  });
});
