import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createTransformersEmbedder } from '../../src/embed/transformers.js';
import type { Embedder } from '../../src/embed/types.js';
import { type TinyModel, writeTinyModel } from '../fixtures/tiny-model.js';
import { meanPoolNormalise, referenceWordPiece } from './wordpiece-reference.js';

let dir: string;
let model: TinyModel;
let embedder: Embedder;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'sourcebound-embed-'));
  model = await writeTinyModel(dir);
  embedder = await createTransformersEmbedder({ modelId: model.modelId, modelDir: model.modelDir });
});

afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

const SENTENCES = [
  'The bus was late.',
  'Claim a refund within seven days of the delay!',
  'Marrowgate tram passes: child, adult and senior fares',
  'Lost property is kept at the depot office for one month, then given away',
  'bikes',
];

function withSpecials(text: string): number[] {
  const id = (t: string) => model.vocab.indexOf(t);
  return [id('[CLS]'), ...referenceWordPiece(text, model.vocab), id('[SEP]')];
}

function expectClose(actual: Float32Array | undefined, expected: Float64Array): void {
  expect(actual).toBeDefined();
  expect(actual).toHaveLength(expected.length);
  for (let d = 0; d < expected.length; d++) expect(Math.abs((actual as Float32Array)[d]! - expected[d]!)).toBeLessThan(1e-5);
}

describe('the reference tokenizer used by these tests', () => {
  it('splits words, punctuation and subwords the way WordPiece does', () => {
    const ids = referenceWordPiece('The refunding, zzz', model.vocab).map((i) => model.vocab[i]);
    expect(ids).toEqual(['the', 'refund', '##ing', ',', '[UNK]']);
  });
});

describe('createTransformersEmbedder on the tiny model', () => {
  it('reports the model id with its precision, its width and its token limit', () => {
    expect(embedder.id).toBe('test/tiny-bert@q8');
    expect(embedder.dimensions).toBe(model.dims);
    expect(embedder.semantic).toBe(true);
    // min(512, tokenizer model_max_length 128, max_position_embeddings 128)
    expect(embedder.maxTokens).toBe(128);
  });

  it('names full-precision weights fp32 in its id', async () => {
    const fp32 = await createTransformersEmbedder({ modelId: model.modelId, modelDir: model.modelDir, quantized: false });
    expect(fp32.id).toBe('test/tiny-bert@fp32');
  });

  it('returns mean-pooled, L2-normalised table rows for each sentence, [CLS] and [SEP] included', async () => {
    // Sentence-BERT pooling (Reimers and Gurevych 2019), computed by hand from the fixture table.
    for (const sentence of SENTENCES) {
      const [vector] = await embedder.embed([sentence]);
      expectClose(vector, meanPoolNormalise(withSpecials(sentence), model.table, model.dims));
    }
  });

  it('gives the same vectors in a padded batch of different lengths as one by one', async () => {
    const batch = await embedder.embed(SENTENCES);
    expect(batch).toHaveLength(SENTENCES.length);
    SENTENCES.forEach((sentence, i) => {
      expectClose(batch[i], meanPoolNormalise(withSpecials(sentence), model.table, model.dims));
    });
  });

  it('keeps input order across several forward passes when the batch size is small', async () => {
    const small = await createTransformersEmbedder({ modelId: model.modelId, modelDir: model.modelDir, batchSize: 2 });
    const vectors = await small.embed(SENTENCES);
    expect(vectors).toHaveLength(SENTENCES.length);
    SENTENCES.forEach((sentence, i) => {
      expectClose(vectors[i], meanPoolNormalise(withSpecials(sentence), model.table, model.dims));
    });
  });

  it('returns unit-length vectors and nothing for an empty batch', async () => {
    const [v] = await embedder.embed(['Wheelchair ramp assistance at every tram stop']);
    const n = Math.hypot(...Array.from(v as Float32Array));
    expect(n).toBeCloseTo(1, 5);
    expect(await embedder.embed([])).toEqual([]);
  });

  it('counts tokens as the tokenizer does, without [CLS] and [SEP]', async () => {
    const { AutoTokenizer } = await import('@xenova/transformers');
    const tokenizer = await AutoTokenizer.from_pretrained(model.modelId);
    for (const sentence of [...SENTENCES, '', 'unknownish words like zzyzx count too']) {
      const count = embedder.countTokens(sentence);
      expect(count).toBe(referenceWordPiece(sentence, model.vocab).length);
      expect(count).toBe(tokenizer.encode(sentence).length - 2);
    }
  });
});
