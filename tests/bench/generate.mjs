// Deterministic synthetic data for the benchmarks: seeded PRNG, clustered unit vectors, Zipf-distributed text.
// Nothing here is read from disk or the network, so every run on every machine sees the same data.

/** mulberry32: a small 32-bit seeded PRNG (public-domain construction); uniform in [0, 1). */
export function rng(seed) {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

/** Standard normal deviates by the Box–Muller transform. */
export function gaussian(rand) {
  let spare = null;
  return () => {
    if (spare !== null) {
      const s = spare;
      spare = null;
      return s;
    }
    const u = rand() || 1e-12;
    const v = rand();
    const r = Math.sqrt(-2 * Math.log(u));
    spare = r * Math.sin(2 * Math.PI * v);
    return r * Math.cos(2 * Math.PI * v);
  };
}

/**
 * Unit vectors drawn around `clusters` random centres (noise norm ≈ `spread` × centre norm). Sentence
 * embeddings of a document collection are clustered by topic rather than uniform on the sphere, and uniform
 * random vectors in 384 dimensions are a needlessly pessimistic case for any graph index.
 */
export function clusteredVectors({ count, dims, clusters = 1000, spread = 0.6, seed = 7 }) {
  const g = gaussian(rng(seed));
  const centres = [];
  for (let c = 0; c < clusters; c++) {
    const v = new Float32Array(dims);
    for (let i = 0; i < dims; i++) v[i] = g() / Math.sqrt(dims);
    centres.push(v);
  }
  const pick = rng(seed + 1);
  const out = [];
  for (let n = 0; n < count; n++) {
    const c = centres[Math.floor(pick() * clusters)];
    const v = new Float32Array(dims);
    let norm = 0;
    for (let i = 0; i < dims; i++) {
      v[i] = c[i] + (spread * g()) / Math.sqrt(dims);
      norm += v[i] * v[i];
    }
    norm = Math.sqrt(norm);
    for (let i = 0; i < dims; i++) v[i] /= norm;
    out.push(v);
  }
  return out;
}

/** An invented vocabulary of pronounceable words, none of them English. */
export function vocabulary(size, seed = 11) {
  const rand = rng(seed);
  const onset = ['b', 'd', 'f', 'g', 'k', 'l', 'm', 'n', 'p', 'r', 's', 't', 'v', 'z', 'br', 'dr', 'kl', 'st', 'tr', 'gr'];
  const vowel = ['a', 'e', 'i', 'o', 'u', 'ai', 'ou', 'ea'];
  const seen = new Set();
  const words = [];
  while (words.length < size) {
    const syll = 2 + Math.floor(rand() * 3);
    let w = '';
    for (let s = 0; s < syll; s++) w += onset[Math.floor(rand() * onset.length)] + vowel[Math.floor(rand() * vowel.length)];
    if (!seen.has(w)) {
      seen.add(w);
      words.push(w);
    }
  }
  return words;
}

/** Samples word ranks from a Zipf law with exponent 1 (word frequencies in text follow it closely). */
export function zipfSampler(size, rand) {
  const cdf = new Float64Array(size);
  let sum = 0;
  for (let r = 0; r < size; r++) {
    sum += 1 / (r + 1);
    cdf[r] = sum;
  }
  return () => {
    const x = rand() * sum;
    let lo = 0;
    let hi = size - 1;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (cdf[mid] < x) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  };
}

export function percentile(sorted, p) {
  if (sorted.length === 0) return NaN;
  const i = Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1));
  return sorted[i];
}

export function latencySummary(ms) {
  const s = [...ms].sort((a, b) => a - b);
  const total = ms.reduce((a, b) => a + b, 0);
  return { p50: percentile(s, 50), p95: percentile(s, 95), p99: percentile(s, 99), qps: (1000 * ms.length) / total };
}
