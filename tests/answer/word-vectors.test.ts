import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { createLexiconSource } from '../../src/answer/lexicon-source.js';
import { expansionWords } from '../../src/answer/terms.js';
import { buildVocabulary } from '../../src/answer/vocabulary.js';
import { bundledWordVectorsFile, neighbourIndex, readWordVectors, softCoverage, wordVectorsSetting } from '../../src/answer/word-vectors.js';

const dir = mkdtempSync(path.join(tmpdir(), 'sb-wv-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));

/** Writes a vectors file in the format of scripts/word-vectors.mjs (signed bytes, one scale a word). */
function writeVectors(file: string, rows: Record<string, number[]>): void {
  const words = Object.keys(rows);
  const dims = rows[words[0]!]!.length;
  const head = Buffer.alloc(16);
  head.write('SBWV', 0, 'latin1');
  head.writeUInt32LE(1, 4);
  head.writeUInt32LE(words.length, 8);
  head.writeUInt32LE(dims, 12);
  const scales = new Float32Array(words.length);
  const values = new Int8Array(words.length * dims);
  words.forEach((w, i) => {
    const v = rows[w]!;
    const n = Math.hypot(...v);
    const max = Math.max(...v.map((x) => Math.abs(x / n)));
    scales[i] = max / 127;
    v.forEach((x, j) => (values[i * dims + j] = Math.round((x / n / max) * 127)));
  });
  writeFileSync(file, Buffer.concat([head, Buffer.from(scales.buffer), Buffer.from(values.buffer), Buffer.from(words.join('\n'))]));
}

describe('word vectors', () => {
  const small = path.join(dir, 'small.bin');
  writeVectors(small, { refund: [1, 0, 0], repayment: [0.9, 0.1, 0], money: [0.6, 0.8, 0], tree: [0, 0, 1] });

  it('reads the format back as unit vectors, and refuses a file that is not one, naming it', () => {
    const v = readWordVectors(small);
    expect(v.size).toBe(4);
    expect(v.dimensions).toBe(3);
    expect(Math.hypot(...v.vector('money')!)).toBeCloseTo(1, 2);
    expect(v.vector('absent')).toBeNull();
    const bad = path.join(dir, 'bad.bin');
    writeFileSync(bad, 'not vectors at all');
    expect(() => readWordVectors(bad)).toThrow(/bad\.bin: not a word-vectors file/);
    const cut = path.join(dir, 'cut.bin');
    writeFileSync(cut, readFileSync(small).subarray(0, 30));
    expect(() => readWordVectors(cut)).toThrow(/truncated/);
  });

  it('finds the collection words nearest to a word, above the floor, never the word itself', () => {
    const nn = neighbourIndex(readWordVectors(small), ['repayment', 'money', 'tree', 'refund']);
    expect(nn.nearest('refund', 5, 0.5).map((n) => n.word)).toEqual(['repayment', 'money']);
    expect(nn.nearest('refund', 1, 0.5).map((n) => n.word)).toEqual(['repayment']);
    expect(nn.nearest('unknown', 5, 0)).toEqual([]);
  });

  it('soft coverage: a held word counts whole, a near word by its cosine, an unrelated one not at all', () => {
    const v = readWordVectors(small);
    expect(softCoverage(v, [{ label: 'refund', weight: 2 }], ['refund'])).toBe(1);
    expect(softCoverage(v, [{ label: 'refund', weight: 2 }], ['tree'])).toBeCloseTo(0, 2);
    const near = softCoverage(v, [{ label: 'refund', weight: 1 }, { label: 'tree', weight: 1 }], ['repayment']);
    // (cos(refund, repayment) = 0.9 / sqrt(0.82) = 0.9939, plus 0 for tree) / 2
    expect(near).toBeCloseTo(0.497, 2);
  });

  it('the bundled GloVe vectors hold the neighbours their paper shows for "frog" (Pennington, Socher and Manning 2014; from memory of its example list: frogs, toad, ...)', () => {
    const v = readWordVectors(bundledWordVectorsFile());
    expect(v.size).toBe(100_000);
    expect(v.dimensions).toBe(100);
    const candidates = ['frogs', 'toad', 'table', 'finance', 'treaty', 'singer', 'engine', 'river', 'paper', 'crowd'];
    const nn = neighbourIndex(v, candidates);
    expect(nn.nearest('frog', 2, 0).map((n) => n.word).sort()).toEqual(['frogs', 'toad']);
  });

  it('expands a question word to the collection\'s nearest wording, and only when the setting is on', () => {
    const texts = ['Holiday lets to visitors are not allowed.', 'Rent is due every Monday.'];
    const on = createLexiconSource({ generation: () => 1, texts: () => texts, termsDir: null, wordVectors: wordVectorsSetting('bundled') })('c');
    expect(expansionWords('Could I let my room to tourists?', on)).toContain('visitors');
    let reads = 0;
    const off = createLexiconSource({
      generation: () => 1,
      texts: () => texts,
      termsDir: null,
      wordVectors: () => {
        reads++;
        return wordVectorsSetting(null)();
      },
    })('c');
    expect(expansionWords('Could I let my room to tourists?', off)).not.toContain('visitors');
    expect(reads).toBe(1);
    expect(buildVocabulary(texts).hasWord('visitors')).toBe(true);
  });
});
