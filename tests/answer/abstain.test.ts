import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
  ABSTAIN_TEXT,
  DEFAULT_THRESHOLDS,
  abstainReason,
  confidence,
  isAbstentionReply,
  rarityWeights,
  weightedCoverage,
} from '../../src/answer/abstain.js';
import { CAUTION } from '../../src/answer/caution.js';

const t = DEFAULT_THRESHOLDS;

describe('abstainReason', () => {
  it('abstains when there are no hits', () => {
    expect(abstainReason({ hitCount: 0, coverage: 1, denseScore: 0.9 }, t)).toBe('no_hits');
  });

  it('abstains only when word coverage and dense similarity are both weak', () => {
    expect(abstainReason({ hitCount: 3, coverage: 0.1, denseScore: 0.2 }, t)).toBe('weak_evidence');
    expect(abstainReason({ hitCount: 3, coverage: 0.1, denseScore: null }, t)).toBe('weak_evidence');
    expect(abstainReason({ hitCount: 3, coverage: 0.1, denseScore: 0.7 }, t)).toBeNull();
    expect(abstainReason({ hitCount: 3, coverage: 0.8, denseScore: null }, t)).toBeNull();
  });

  it('treats the thresholds as inclusive lower bounds', () => {
    const th = { minLexicalCoverage: 0.4, minDenseScore: 0.5 };
    expect(abstainReason({ hitCount: 1, coverage: 0.4, denseScore: 0 }, th)).toBeNull();
    expect(abstainReason({ hitCount: 1, coverage: 0.39, denseScore: 0.5 }, th)).toBeNull();
    expect(abstainReason({ hitCount: 1, coverage: 0.39, denseScore: 0.49 }, th)).toBe('weak_evidence');
  });

  it('abstains when the model abstained or no generated claim is supported', () => {
    const ok = { hitCount: 2, coverage: 0.9, denseScore: 0.8 };
    expect(abstainReason({ ...ok, modelAbstained: true }, t)).toBe('model_abstained');
    expect(abstainReason({ ...ok, supportedClaims: 0 }, t)).toBe('unsupported_answer');
    expect(abstainReason({ ...ok, supportedClaims: 1 }, t)).toBeNull();
  });
});

describe('confidence', () => {
  it('stays in [0,1] and never falls when any piece of evidence grows', () => {
    const unit = fc.double({ min: 0, max: 1, noNaN: true });
    fc.assert(
      fc.property(unit, unit, unit, unit, (c, d, s, bump) => {
        const base = confidence({ coverage: c, denseScore: d, supportedShare: s });
        expect(base).toBeGreaterThanOrEqual(0);
        expect(base).toBeLessThanOrEqual(1);
        const up = (x: number): number => Math.min(1, x + bump);
        expect(confidence({ coverage: up(c), denseScore: d, supportedShare: s })).toBeGreaterThanOrEqual(base);
        expect(confidence({ coverage: c, denseScore: up(d), supportedShare: s })).toBeGreaterThanOrEqual(base);
        expect(confidence({ coverage: c, denseScore: d, supportedShare: up(s) })).toBeGreaterThanOrEqual(base);
      }),
    );
  });

  it('is zero without evidence and needs both signals to come close to one', () => {
    expect(confidence({ coverage: 0, denseScore: null, supportedShare: 1 })).toBe(0);
    expect(confidence({ coverage: 1, denseScore: null, supportedShare: 1 })).toBe(0.85);
    expect(confidence({ coverage: 1, denseScore: 1, supportedShare: 1 })).toBeCloseTo(0.978, 3);
    expect(confidence({ coverage: 1, denseScore: 1, supportedShare: 0.5 })).toBeCloseTo(0.489, 3);
  });
});

describe('rarity-weighted coverage', () => {
  it('weighs a question word missing from every candidate more than a common one', () => {
    const cands = [new Set(['tram', 'fare']), new Set(['tram', 'refund']), new Set(['tram', 'lead'])];
    const w = rarityWeights(['tram', 'parking'], cands);
    expect(w.get('parking')).toBeGreaterThan(w.get('tram') ?? Infinity);
    expect(weightedCoverage(w, new Set(['tram', 'fare']))).toBeLessThan(0.5);
  });
});

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
