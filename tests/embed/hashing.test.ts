import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { countHashingTokens, createHashingEmbedder, fnv1a32, hashingVector } from '../../src/embed/hashing.js';

function norm(v: Float32Array): number {
  let s = 0;
  for (const x of v) s += x * x;
  return Math.sqrt(s);
}

function cosine(a: Float32Array, b: Float32Array): number {
  let s = 0;
  for (let i = 0; i < a.length; i++) s += (a[i] as number) * (b[i] as number);
  return s;
}

describe('fnv1a32', () => {
  it('matches the published FNV-1a 32-bit test vectors', () => {
    // Source: FNV reference test suite (Noll, "FNV Hash", isthe.com/chongo/tech/comp/fnv);
    // values recalled from memory and re-checked with an independent byte-wise Python implementation.
    expect(fnv1a32('')).toBe(0x811c9dc5);
    expect(fnv1a32('a')).toBe(0xe40c292c);
    expect(fnv1a32('foobar')).toBe(0xbf9cf968);
  });
});

describe('createHashingEmbedder', () => {
  it('describes itself as a non-semantic 4096-dimension embedder by default', () => {
    const e = createHashingEmbedder();
    expect(e.id).toBe('hashing-v1-4096');
    expect(e.dimensions).toBe(4096);
    expect(e.semantic).toBe(false);
    expect(e.maxTokens).toBe(256);
  });

  it('respects the requested dimensions, including ones that are not powers of two', async () => {
    for (const dimensions of [384, 1000]) {
      const e = createHashingEmbedder({ dimensions });
      expect(e.id).toBe(`hashing-v1-${dimensions}`);
      const [v] = await e.embed(['Night buses leave Marrowgate depot at 23:40']);
      expect(v).toHaveLength(dimensions);
      expect(norm(v as Float32Array)).toBeCloseTo(1, 5);
    }
  });

  it('rejects a dimension count that is not a positive integer', () => {
    expect(() => createHashingEmbedder({ dimensions: 0 })).toThrow(RangeError);
    expect(() => createHashingEmbedder({ dimensions: 12.5 })).toThrow(RangeError);
  });

  it('returns one unit-length vector per input text that has any word in it', () => {
    fc.assert(
      fc.property(fc.string({ minLength: 1, maxLength: 80 }), (raw) => {
        const text = `${raw} x`;
        expect(norm(hashingVector(text, 512))).toBeCloseTo(1, 4);
      }),
      { numRuns: 200 },
    );
  });

  it('embeds empty and punctuation-only text to the zero vector instead of NaN', async () => {
    const e = createHashingEmbedder({ dimensions: 64 });
    const [empty, punct, spaces] = await e.embed(['', '?!… — ...', '   \n\t']);
    for (const v of [empty, punct, spaces]) {
      expect(v).toHaveLength(64);
      expect(Array.from(v as Float32Array).every((x) => x === 0)).toBe(true);
    }
  });

  it('gives the same vector for the same text across calls and instances', async () => {
    const text = 'Delay refunds are paid within 14 days of a valid claim.';
    const [a] = await createHashingEmbedder().embed([text]);
    const [b] = await createHashingEmbedder().embed([text]);
    expect(Array.from(b as Float32Array)).toEqual(Array.from(a as Float32Array));
  });

  it('keeps hashing-v1 vectors stable so stored vectors stay comparable', () => {
    // Pinned from this implementation (not an external source): if this changes, stored vectors
    // no longer match new ones and the embedder id must change to hashing-v2.
    const v = hashingVector('tram', 4096);
    const nonzero = Array.from(v.entries()).filter(([, x]) => x !== 0);
    // "tram" yields 1 word + 4 trigrams + 3 four-grams + 2 five-grams of "/tram/" = 10 features.
    expect(nonzero.length).toBeLessThanOrEqual(10);
    const fingerprint = nonzero.map(([i, x]) => `${i}:${Math.sign(x)}`).join(',');
    expect(fingerprint).toBe("52:1,255:-1,1281:1,1939:-1,2118:-1,2981:-1,3070:-1,3105:1,3369:-1,3449:1");
  });

  it('puts paraphrases closer together than unrelated policy text', () => {
    const a = hashingVector('Delay refunds for late trams on the Marrowgate line', 4096);
    const b = hashingVector('How do I claim a refund when my tram was delayed?', 4096);
    const c = hashingVector('Dogs must be kept on a short lead while on board buses', 4096);
    expect(cosine(a, b)).toBeGreaterThan(cosine(a, c) + 0.05);
    // Character n-grams make inflections share mass: "refunds" vs "refund".
    expect(cosine(hashingVector('refunds', 4096), hashingVector('refund', 4096))).toBeGreaterThan(0.5);
  });

  it('treats compatibility forms and case as the same text (NFKC + lower-case)', () => {
    expect(Array.from(hashingVector('ＢＵＳ ﬁne', 256))).toEqual(Array.from(hashingVector('bus fine', 256)));
  });

  it('spreads signs so that a component averages out near zero over many texts', () => {
    // The point of the sign bit (Weinberger et al. 2009): collisions cancel in expectation
    // instead of adding up, so the summed vector stays near zero.
    const dims = 256;
    const words = 'bus tram fare refund delay ticket pass child senior bike lost property seat ramp driver stop'.split(' ');
    const sum = new Float64Array(dims);
    let positive = 0;
    let nonzero = 0;
    const texts = 600;
    for (let t = 0; t < texts; t++) {
      const text = Array.from({ length: 6 }, (_, k) => words[(t * 7 + k * 5 + (t >> 3)) % words.length]).join(' ') + ` route ${t}`;
      const v = hashingVector(text, dims);
      v.forEach((x, i) => {
        sum[i] = (sum[i] as number) + x;
        if (x !== 0) nonzero++;
        if (x > 0) positive++;
      });
    }
    const meanAbs = Array.from(sum).reduce((s, x) => s + Math.abs(x / texts), 0) / dims;
    // Unsigned hashing would give a mean component of about 1/sqrt(#features) ≈ 0.1 here.
    expect(meanAbs).toBeLessThan(0.03);
    expect(positive / nonzero).toBeGreaterThan(0.45);
    expect(positive / nonzero).toBeLessThan(0.55);
  });
});

describe('countHashingTokens', () => {
  it('counts words and punctuation marks as tokens', () => {
    expect(countHashingTokens('The bus was late, so claim a refund!')).toBe(10);
    expect(countHashingTokens('')).toBe(0);
    expect(countHashingTokens('£2.50 (child)')).toBe(7);
  });

  it('counts a word longer than 12 characters as one token per 6 characters, rounded up', () => {
    expect(countHashingTokens('accessibility')).toBe(Math.ceil(13 / 6));
    expect(countHashingTokens('compensations')).toBe(3);
    // Exactly 12 characters is still one token.
    expect(countHashingTokens('compensation')).toBe(1);
  });

  it('is what the embedder reports as its token count', () => {
    const e = createHashingEmbedder();
    expect(e.countTokens('Bikes on board: folded bikes only, at peak times.')).toBe(12);
  });
});
