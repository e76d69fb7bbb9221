// Small numeric helpers shared by several stages.

/** Inner product over the shorter length (cosine similarity for unit vectors). */
export function dot(a: Float32Array, b: Float32Array): number {
  let s = 0;
  const n = Math.min(a.length, b.length);
  for (let i = 0; i < n; i++) s += a[i]! * b[i]!;
  return s;
}

/** Greatest common divisor of two non-negative integers. */
export function gcd(a: number, b: number): number {
  while (b) [a, b] = [b, a % b];
  return a;
}

/** Rounded to three decimals (seconds in summaries, scores in reports). */
export function round3(x: number): number {
  return Math.round(x * 1000) / 1000;
}
