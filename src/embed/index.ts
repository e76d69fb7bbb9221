export type { Embedder } from './types.js';
export { createHashingEmbedder, countHashingTokens, hashingVector, HASHING_DEFAULT_DIMENSIONS } from './hashing.js';
export type { HashingEmbedderOptions } from './hashing.js';
export { createTransformersEmbedder } from './transformers.js';
export type { TransformersEmbedderOptions } from './transformers.js';
export { modelPresent, modelPath, resolveEmbedder } from './resolve.js';
export type { EmbedderProvider, ResolveEmbedderOptions, ResolvedEmbedder } from './resolve.js';
export { pullModel, DEFAULT_REMOTE_HOST } from './pull.js';
export type { PullModelOptions, PullProgress, PullResult } from './pull.js';
