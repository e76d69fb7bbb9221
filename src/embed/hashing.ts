import type { Embedder } from './types.js';

export interface HashingEmbedderOptions {
  /** Vector length. 4096 by default: at 384 dimensions collisions cost more than fusion gains (DESIGN.md, CISI). */
  dimensions?: number;
}

export const HASHING_DEFAULT_DIMENSIONS = 4096;
const MAX_TOKENS = 256;

// Words are runs of letters, combining marks and digits; every other non-space character is
// a punctuation token of its own. Marks are kept inside words so scripts that NFKC leaves
// decomposed (e.g. Devanagari vowel signs) are not cut apart.
const TOKEN_RE = /[\p{L}\p{M}\p{N}]+|[^\s\p{L}\p{M}\p{N}]/gu;
const WORD_START_RE = /[\p{L}\p{M}\p{N}]/u;

/** A word this long or longer is split by WordPiece-style tokenizers into several pieces. */
const LONG_WORD = 12;
const PIECE_LENGTH = 6;

// Feature kinds are kept apart by seeding the hash with a distinct tag, so the word "the" and the
// character trigram "the" land in unrelated buckets.
const TAG_WORD = 0x57;
const TAG_BIGRAM = 0x42;
const TAG_CHARS = 0x43;
const BOUNDARY = 0x2f; // marks word start/end in character n-grams
const SEPARATOR = 0x20; // between the two words of a bigram

const FNV_OFFSET = 0x811c9dc5;
const FNV_PRIME = 0x01000193;

// FNV-1a (Fowler, Noll, Vo), fed one Unicode code point per step rather than one byte: the
// same mixing, no UTF-8 encoding pass, and stable across runs and platforms.
function fnvStep(h: number, code: number): number {
  return Math.imul(h ^ code, FNV_PRIME);
}

function fnvRange(h: number, codes: Int32Array, start: number, end: number): number {
  for (let i = start; i < end; i++) h = Math.imul(h ^ (codes[i] as number), FNV_PRIME);
  return h;
}

/** Plain 32-bit FNV-1a of a string's code points; equals byte-wise FNV-1a for ASCII text. */
export function fnv1a32(text: string): number {
  let h = FNV_OFFSET;
  for (const ch of text) h = fnvStep(h, ch.codePointAt(0) as number);
  return h >>> 0;
}

// MurmurHash3's 32-bit finaliser: FNV's high bits mix poorly, and the sign is read from bit 31.
function fmix32(h: number): number {
  h ^= h >>> 16;
  h = Math.imul(h, 0x85ebca6b);
  h ^= h >>> 13;
  h = Math.imul(h, 0xc2b2ae35);
  h ^= h >>> 16;
  return h >>> 0;
}

function normalise(text: string): string {
  return text.normalize('NFKC').toLowerCase();
}

function codePointLength(word: string): number {
  let n = 0;
  for (let i = 0; i < word.length; i++) {
    const c = word.charCodeAt(i);
    // Count a surrogate pair once: skip the low half.
    if (c < 0xdc00 || c > 0xdfff) n++;
  }
  return n;
}

/** Word and punctuation tokens, with long words counted as several pieces (never under-counts much for English WordPiece). */
export function countHashingTokens(text: string): number {
  let count = 0;
  for (const match of normalise(text).matchAll(TOKEN_RE)) {
    const token = match[0];
    if (!WORD_START_RE.test(token)) {
      count += 1;
      continue;
    }
    const len = codePointLength(token);
    count += len > LONG_WORD ? Math.ceil(len / PIECE_LENGTH) : 1;
  }
  return count;
}

/**
 * Hashes features of `text` into a signed, 1 + ln(tf)-weighted, L2-normalised vector.
 * Exposed for tests and tools; the embedder wraps it.
 */
export function hashingVector(text: string, dimensions: number): Float32Array {
  const vector = new Float32Array(dimensions);
  const counts = new Map<number, number>();
  const add = (h: number): void => {
    const key = fmix32(h);
    counts.set(key, (counts.get(key) ?? 0) + 1);
  };

  const words = normalise(text).match(/[\p{L}\p{M}\p{N}]+/gu) ?? [];
  // Code points of "<boundary>word<boundary>" for the current word; grown as needed.
  let codes = new Int32Array(64);
  let prevStart = -1;
  let prevEnd = -1;
  let prevCodes = new Int32Array(64);

  for (const word of words) {
    const len = codePointLength(word);
    if (codes.length < len + 2) codes = new Int32Array(len + 2);
    codes[0] = BOUNDARY;
    let n = 1;
    for (const ch of word) codes[n++] = ch.codePointAt(0) as number;
    codes[n++] = BOUNDARY;

    // Unigram: the word without its boundary markers.
    add(fnvRange(fnvStep(FNV_OFFSET, TAG_WORD), codes, 1, n - 1));

    if (prevStart >= 0) {
      let h = fnvStep(FNV_OFFSET, TAG_BIGRAM);
      h = fnvRange(h, prevCodes, prevStart, prevEnd);
      h = fnvStep(h, SEPARATOR);
      add(fnvRange(h, codes, 1, n - 1));
    }

    // Character 3- to 5-grams over the bounded word (fastText-style subword features), which let
    // "refunds" and "refund" or a misspelling still share most of their mass.
    const charSeed = fnvStep(FNV_OFFSET, TAG_CHARS);
    for (let size = 3; size <= 5; size++) {
      for (let start = 0; start + size <= n; start++) add(fnvRange(charSeed, codes, start, start + size));
    }

    // Keep this word's code points for the next bigram (swap buffers to avoid copying).
    const swap = prevCodes;
    prevCodes = codes;
    codes = swap;
    prevStart = 1;
    prevEnd = n - 1;
  }

  for (const [key, tf] of counts) {
    const bucket = key % dimensions;
    const weight = 1 + Math.log(tf);
    vector[bucket] = (vector[bucket] as number) + (key & 0x80000000 ? -weight : weight);
  }

  let sumSquares = 0;
  for (let i = 0; i < dimensions; i++) sumSquares += (vector[i] as number) ** 2;
  // Empty or all-punctuation text has no features; leave the zero vector rather than divide by zero.
  if (sumSquares > 0) {
    const inv = 1 / Math.sqrt(sumSquares);
    for (let i = 0; i < dimensions; i++) vector[i] = (vector[i] as number) * inv;
  }
  return vector;
}

/**
 * Built-in fallback embedder: signed feature hashing (Weinberger et al. 2009) of word unigrams,
 * bigrams and character 3–5-grams. Needs no model files, so the service starts offline; it is
 * lexical, not semantic, and the caller says so in logs and /health.
 */
export function createHashingEmbedder(opts: HashingEmbedderOptions = {}): Embedder {
  const dimensions = opts.dimensions ?? HASHING_DEFAULT_DIMENSIONS;
  if (!Number.isInteger(dimensions) || dimensions < 1) {
    throw new RangeError(`hashing embedder dimensions must be a positive integer, got ${String(dimensions)}`);
  }
  return {
    id: `hashing-v1-${dimensions}`,
    dimensions,
    semantic: false,
    maxTokens: MAX_TOKENS,
    countTokens: countHashingTokens,
    async embed(texts: string[]): Promise<Float32Array[]> {
      return texts.map((text) => hashingVector(text, dimensions));
    },
  };
}
