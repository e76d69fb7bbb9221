import { existsSync } from 'node:fs';
import { join } from 'node:path';
import { createHashingEmbedder } from './hashing.js';
import { createTransformersEmbedder } from './transformers.js';
import type { Embedder } from './types.js';

export type EmbedderProvider = 'auto' | 'transformers' | 'hashing';

export interface ResolveEmbedderOptions {
  modelId: string;
  modelDir: string;
  quantized: boolean;
  batchSize: number;
  hashingDimensions: number;
  provider: EmbedderProvider;
}

export interface ResolvedEmbedder {
  embedder: Embedder;
  /** One sentence saying which embedder was chosen and why; the caller logs it. */
  reason: string;
}

/** Where the model's files live: the layout transformers.js expects under `localModelPath`. */
export function modelPath(modelDir: string, modelId: string): string {
  return join(modelDir, ...modelId.split('/'));
}

/** Weight file names in the order they are preferred for the requested precision. */
export function weightFiles(quantized: boolean): string[] {
  return quantized ? ['model_quantized.onnx', 'model.onnx'] : ['model.onnx', 'model_quantized.onnx'];
}

/** True when `<modelDir>/<modelId>/` holds config.json, tokenizer.json and ONNX weights. */
export function modelPresent(modelDir: string, modelId: string, quantized: boolean): boolean {
  const root = modelPath(modelDir, modelId);
  if (!existsSync(join(root, 'config.json')) || !existsSync(join(root, 'tokenizer.json'))) return false;
  return weightFiles(quantized).some((name) => existsSync(join(root, 'onnx', name)));
}

/** Which precision to load: the requested one, else whichever weight file is on disk. */
function presentPrecision(modelDir: string, modelId: string, quantized: boolean): boolean {
  const [preferred] = weightFiles(quantized);
  return existsSync(join(modelPath(modelDir, modelId), 'onnx', preferred as string)) ? quantized : !quantized;
}

function missingModelMessage(opts: ResolveEmbedderOptions): string {
  return `no model at ${modelPath(opts.modelDir, opts.modelId)}; run \`sourcebound model pull ${opts.modelId}\``;
}

/**
 * Picks the embedder: the transformers model when its files are on disk, else (in `auto`) the
 * built-in hashing embedder, with a reason the caller must surface, since hashing vectors are
 * not semantic and retrieval quality drops.
 */
export async function resolveEmbedder(opts: ResolveEmbedderOptions): Promise<ResolvedEmbedder> {
  if (opts.provider === 'hashing') {
    return {
      embedder: createHashingEmbedder({ dimensions: opts.hashingDimensions }),
      reason: 'hashing embedder selected by configuration',
    };
  }
  if (!modelPresent(opts.modelDir, opts.modelId, opts.quantized)) {
    const message = missingModelMessage(opts);
    if (opts.provider === 'transformers') throw new Error(message);
    return {
      embedder: createHashingEmbedder({ dimensions: opts.hashingDimensions }),
      reason: `${message}; using the hashing embedder (lexical, not semantic) meanwhile`,
    };
  }
  const quantized = presentPrecision(opts.modelDir, opts.modelId, opts.quantized);
  const embedder = await createTransformersEmbedder({
    modelId: opts.modelId,
    modelDir: opts.modelDir,
    quantized,
    batchSize: opts.batchSize,
  });
  const note = quantized === opts.quantized ? '' : ` (${opts.quantized ? 'quantized' : 'full-precision'} weights absent; using the other file)`;
  return { embedder, reason: `model ${embedder.id} loaded from ${modelPath(opts.modelDir, opts.modelId)}${note}` };
}
