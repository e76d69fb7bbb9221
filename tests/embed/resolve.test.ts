import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { modelPresent, resolveEmbedder, type ResolveEmbedderOptions } from '../../src/embed/resolve.js';
import { writeTinyModel } from '../fixtures/tiny-model.js';

const dirs: string[] = [];
async function tempDir(): Promise<string> {
  const dir = await mkdtemp(join(tmpdir(), 'sourcebound-resolve-'));
  dirs.push(dir);
  return dir;
}

afterEach(async () => {
  await Promise.all(dirs.splice(0).map((d) => rm(d, { recursive: true, force: true })));
});

function options(modelDir: string, overrides: Partial<ResolveEmbedderOptions> = {}): ResolveEmbedderOptions {
  return {
    modelId: 'test/tiny-bert',
    modelDir,
    quantized: true,
    batchSize: 8,
    hashingDimensions: 1024,
    provider: 'auto',
    ...overrides,
  };
}

describe('modelPresent', () => {
  it('is false for an empty folder and true once the tiny model is written', async () => {
    const dir = await tempDir();
    expect(modelPresent(dir, 'test/tiny-bert', true)).toBe(false);
    await writeTinyModel(dir);
    expect(modelPresent(dir, 'test/tiny-bert', true)).toBe(true);
    expect(modelPresent(dir, 'test/other-model', true)).toBe(false);
  });

  it('accepts either weight file whichever precision is asked for', async () => {
    const dir = await tempDir();
    await writeTinyModel(dir, { weights: ['model.onnx'] });
    expect(modelPresent(dir, 'test/tiny-bert', true)).toBe(true);
    expect(modelPresent(dir, 'test/tiny-bert', false)).toBe(true);
  });

  it('is false when the weights exist but the tokenizer does not', async () => {
    const dir = await tempDir();
    await writeTinyModel(dir);
    await rm(join(dir, 'test', 'tiny-bert', 'tokenizer.json'));
    expect(modelPresent(dir, 'test/tiny-bert', true)).toBe(false);
  });
});

describe('resolveEmbedder', () => {
  it('falls back to the hashing embedder in auto mode when the folder is empty, saying how to get the model', async () => {
    const dir = await tempDir();
    const { embedder, reason } = await resolveEmbedder(options(dir));
    expect(embedder.id).toBe('hashing-v1-1024');
    expect(embedder.semantic).toBe(false);
    expect(reason).toContain(join(dir, 'test', 'tiny-bert'));
    expect(reason).toContain('sourcebound model pull test/tiny-bert');
  });

  it('loads the transformers model in auto mode when the tiny model is there', async () => {
    const dir = await tempDir();
    await writeTinyModel(dir);
    const { embedder, reason } = await resolveEmbedder(options(dir));
    expect(embedder.id).toBe('test/tiny-bert@q8');
    expect(embedder.semantic).toBe(true);
    expect(reason).toContain('test/tiny-bert@q8');
    const [v] = await embedder.embed(['tram fares']);
    expect(v).toHaveLength(16);
  });

  it('throws with the pull hint when transformers is required and no model is present', async () => {
    const dir = await tempDir();
    await expect(resolveEmbedder(options(dir, { provider: 'transformers' }))).rejects.toThrow(
      /no model at .*tiny-bert.*sourcebound model pull test\/tiny-bert/,
    );
  });

  it('uses the hashing embedder when configured to, even with a model on disk', async () => {
    const dir = await tempDir();
    await writeTinyModel(dir);
    const { embedder } = await resolveEmbedder(options(dir, { provider: 'hashing', hashingDimensions: 4096 }));
    expect(embedder.id).toBe('hashing-v1-4096');
  });

  it('loads the full-precision file when only it is present and says so', async () => {
    const dir = await tempDir();
    await writeTinyModel(dir, { weights: ['model.onnx'] });
    const { embedder, reason } = await resolveEmbedder(options(dir));
    expect(embedder.id).toBe('test/tiny-bert@fp32');
    expect(reason).toMatch(/quantized weights absent/);
  });
});
