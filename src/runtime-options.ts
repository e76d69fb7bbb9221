// The runtime's options read from the configuration: what the answer step, the document limits and the
// storage back end take from it (src/runtime.ts builds the parts with them).

import { readAnswerModel, type AnswererOptions } from './answer/index.js';
import type { Config } from './config/index.js';
import { SourceboundError } from './errors.js';
import type { DocumentLimits } from './ingest/index.js';

/** Refuses a storage back end this release does not serve yet. */
export function refuseUnservedBackend(config: Readonly<Config>): void {
  // The PostgreSQL system of record (src/store/pg/) is not on the query path yet: starting on SQLite instead
  // would quietly write what the operator meant for PostgreSQL into a local file.
  if (config.storage.backend !== 'sqlite') {
    throw new SourceboundError('SB_ERR_CONFIG_INVALID', [
      `  - storage.backend: "${config.storage.backend}" is not served by this release yet (its schema and writes exist, the query path reads SQLite only); use "sqlite"`,
    ]);
  }
}

export function documentLimits(config: Readonly<Config>): DocumentLimits {
  const l = config.limits;
  return {
    maxChars: l.documentMaxChars,
    maxChunks: l.documentMaxChunks,
    parseMaxSeconds: l.parseMaxSeconds,
    htmlMaxDepth: l.htmlMaxDepth,
    zipMaxInflatedBytes: l.zipMaxInflatedBytes,
    zipMaxEntries: l.zipMaxEntries,
    maxDistinctWords: l.documentMaxDistinctWords,
  };
}

export function answererOptions(config: Readonly<Config>): AnswererOptions {
  return {
    k: config.retrieval.k,
    contextBudgetTokens: config.answer.contextBudgetTokens,
    minSupport: config.answer.minSupport,
    rewriteWithCompletion: config.answer.rewriteWithCompletion,
    minAnswerProbability: config.answer.minAnswerProbability,
    ...(config.answer.modelFile ? { model: readAnswerModel(config.answer.modelFile) } : {}),
  };
}

