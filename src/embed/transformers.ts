import type { Embedder } from './types.js';

export interface TransformersEmbedderOptions {
  /** Model id, also the folder under `modelDir`, e.g. "Xenova/all-MiniLM-L6-v2". */
  modelId: string;
  /** Folder holding `<modelId>/config.json`, `tokenizer.json`, `onnx/model*.onnx`. */
  modelDir: string;
  /** Load `onnx/model_quantized.onnx` (default) rather than `onnx/model.onnx`. */
  quantized?: boolean;
  /** Texts per forward pass. */
  batchSize?: number;
}

// BERT-family position tables top out at 512; anything above that in a tokenizer config is a
// "no limit" placeholder (some configs carry 1e30), not a real limit.
const HARD_MAX_TOKENS = 512;

interface ModelConfigLike {
  hidden_size?: unknown;
  max_position_embeddings?: unknown;
}

function positiveInt(value: unknown): number | null {
  return typeof value === 'number' && Number.isFinite(value) && value > 0 ? Math.floor(value) : null;
}

/**
 * Sentence embeddings through transformers.js (ONNX Runtime on CPU): mean pooling over the
 * attention mask, then L2 normalisation (Sentence-BERT, Reimers and Gurevych 2019).
 * Only local files are read; fetching weights is `pullModel`'s job.
 */
export async function createTransformersEmbedder(opts: TransformersEmbedderOptions): Promise<Embedder> {
  const quantized = opts.quantized ?? true;
  const batchSize = Math.max(1, Math.floor(opts.batchSize ?? 32));

  // Imported lazily: loading ONNX Runtime costs time and memory the hashing fallback never needs.
  const { pipeline, env } = await import('@xenova/transformers');
  env.localModelPath = opts.modelDir;
  env.allowRemoteModels = false;
  env.allowLocalModels = true;
  // The file cache is consulted before localModelPath; a stale cached copy of a same-named model
  // would silently win over the files the operator put in modelDir.
  env.useFSCache = false;

  const extractor = await pipeline('feature-extraction', opts.modelId, { quantized });
  const tokenizer = extractor.tokenizer;
  const config = (extractor.model as unknown as { config?: ModelConfigLike }).config ?? {};

  const limits = [
    HARD_MAX_TOKENS,
    positiveInt((tokenizer as unknown as { model_max_length?: unknown }).model_max_length),
    positiveInt(config.max_position_embeddings),
  ].filter((n): n is number => n !== null);
  const maxTokens = Math.min(...limits);

  async function embedBatch(texts: string[]): Promise<Float32Array[]> {
    const output = await extractor(texts, { pooling: 'mean', normalize: true });
    const [rows, width] = output.dims as [number, number];
    const data = output.data as Float32Array;
    const vectors: Float32Array[] = [];
    for (let r = 0; r < rows; r++) vectors.push(Float32Array.from(data.subarray(r * width, (r + 1) * width)));
    return vectors;
  }

  let dimensions = positiveInt(config.hidden_size);
  if (dimensions === null) {
    const [probe] = await embedBatch(['dimension probe']);
    dimensions = probe?.length ?? 0;
  }

  return {
    id: `${opts.modelId}@${quantized ? 'q8' : 'fp32'}`,
    dimensions,
    semantic: true,
    maxTokens,
    countTokens(text: string): number {
      return tokenizer.encode(text, null, { add_special_tokens: false }).length;
    },
    async embed(texts: string[]): Promise<Float32Array[]> {
      const out: Float32Array[] = [];
      for (let i = 0; i < texts.length; i += batchSize) {
        out.push(...(await embedBatch(texts.slice(i, i + batchSize))));
      }
      return out;
    },
  };
}
