// The runtime's options read from the configuration: what the answer step, the document limits and the
// PostgreSQL back end take from it (src/runtime.ts builds the parts with them).

import { setFlagsFromString } from 'node:v8';
import { readAnswerModel, type AnswererOptions } from './answer/index.js';
import type { Config } from './config/index.js';
import { SourceboundError } from './errors.js';
import type { DocumentLimits } from './ingest/index.js';

/** What a process on the PostgreSQL back end needs beside the URL; refuses a configuration that lacks it. */
export function postgresSettings(config: Readonly<Config>): { url: string; sharedDir: string; followPollMs: number } {
  const s = config.storage;
  if (s.backend !== 'postgres' || s.databaseUrl === null) {
    throw new SourceboundError('SB_ERR_CONFIG_INVALID', ['  - storage.backend: this command needs "postgres" and SOURCEBOUND_DATABASE_URL']);
  }
  // Every node must reach every upload (any node may be asked for any original, any worker may take any job):
  // a folder of one node's own would lose them.
  if (s.sharedDir === null) {
    throw new SourceboundError('SB_ERR_CONFIG_INVALID', [
      '  - storage.sharedDir: backend "postgres" needs a folder every node and worker reaches, for uploads and originals (set SOURCEBOUND_SHARED_DIR)',
    ]);
  }
  return { url: s.databaseUrl, sharedDir: s.sharedDir, followPollMs: s.followPollMs };
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


/**
 * `limits.heapGrowthPercent` as V8's `--heap-growing-percent`, for every thread of the process (V8's flags are
 * per process). V8 reads it each time a full collection sets the next one's threshold, so it takes effect from
 * the next collection on, whenever it is set. V8's own factor (1.1 to 4, higher while memory looks plentiful: its
 * heap controller, src/heap/heap-controller.cc, as remembered from the source) let the
 * request thread's heap fill with garbage from 50 to about 200 MiB while a large upload's chunks were applied
 * (docs/benchmarks.md, "Bounded memory"). It is not a cap: the heap still grows to whatever is live.
 */
export function applyHeapGrowth(config: Readonly<Config>): void {
  const percent = config.limits.heapGrowthPercent;
  if (percent > 0) setFlagsFromString(`--heap-growing-percent=${percent}`);
}
