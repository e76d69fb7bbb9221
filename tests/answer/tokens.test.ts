// Reference: the gpt-tokenizer library (npm "gpt-tokenizer" v3), encodings cl100k_base and
// o200k_base. The context builder must count exactly what that library counts.
import { encode as encodeCl100k } from 'gpt-tokenizer/encoding/cl100k_base';
import { encode as encodeO200k } from 'gpt-tokenizer/encoding/o200k_base';
import { describe, expect, it } from 'vitest';
import { fitContext } from '../../src/answer/context.js';
import { renderSource } from '../../src/answer/render.js';
import { estimateTokenizer, loadTokenizer } from '../../src/answer/tokens.js';
import { DOCS, hitBetween, wholeDoc } from './fixtures.js';

const PLAIN = { disallowedSpecial: new Set<string>() };
const REFERENCE = {
  cl100k_base: (t: string) => encodeCl100k(t, PLAIN).length,
  o200k_base: (t: string) => encodeO200k(t, PLAIN).length,
} as const;

const SAMPLES = [
  'hello world',
  'Claims for delay refunds must be made within 28 days of the journey.',
  '| 30 to 59 minutes | 50% of the single fare |',
  'Fares: £8.40 (Zones A–C), €2 surcharge — “quoted” text, naïve café, 東京, emoji 🚋',
  'A policy that literally contains <|endoftext|> must still be counted as text.',
  '',
];

describe.each(['cl100k_base', 'o200k_base'] as const)('loadTokenizer("%s")', (name) => {
  it('counts exactly as the reference library encodes, special-token text included', async () => {
    const tok = await loadTokenizer(name);
    expect(tok.exact).toBe(true);
    expect(tok.name).toBe(name);
    for (const s of SAMPLES) expect(tok.count(s)).toBe(REFERENCE[name](s));
  });

  it('makes the context builder report the same token total the reference gives for the rendered blocks', async () => {
    const tok = await loadTokenizer(name);
    const hits = [wholeDoc(DOCS.refund, { score: 0.9 }), wholeDoc(DOCS.access, { score: 0.5 })];
    const { sources, tokens } = fitContext(hits, { budgetTokens: 10_000, countTokens: tok.count });
    expect(sources).toHaveLength(2);
    const reference = sources.reduce((sum, s) => sum + REFERENCE[name](renderSource(s)), 0);
    expect(tokens).toBe(reference);
  });

  it('keeps the context within a budget counted in that encoding, at the edge and one token under it', async () => {
    const tok = await loadTokenizer(name);
    const hits = [hitBetween(DOCS.refund, 'You can claim', 'timetable.', { score: 0.9 }), hitBetween(DOCS.access, 'Guide dogs', 'seats.', { score: 0.5 })];
    const both = fitContext(hits, { budgetTokens: 10_000, countTokens: tok.count });
    const exact = fitContext(hits, { budgetTokens: both.tokens, countTokens: tok.count });
    expect(exact.sources).toHaveLength(2);
    const under = fitContext(hits, { budgetTokens: both.tokens - 1, countTokens: tok.count });
    expect(under.sources).toHaveLength(1);
    expect(under.tokens).toBe(REFERENCE[name](renderSource(under.sources[0]!)));
  });
});

describe('loadTokenizer("cl100k_base") on a known value', () => {
  it('splits "hello world" into two tokens (ids 15339 and 1917; value from memory of the encoding, confirmed by the reference library)', async () => {
    expect(encodeCl100k('hello world')).toEqual([15339, 1917]);
    expect((await loadTokenizer('cl100k_base')).count('hello world')).toBe(2);
  });
});

describe('estimateTokenizer', () => {
  it('says its counts are estimates and rounds a quarter of the characters up', () => {
    const t = estimateTokenizer();
    expect(t.exact).toBe(false);
    expect(t.count('abcd')).toBe(1);
    expect(t.count('abcde')).toBe(2);
    expect(t.count('')).toBe(0);
  });
});
