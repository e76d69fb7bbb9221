// The composition root: wires the stages together from a config (store → embedder → indexes → retriever →
// answerer → ingestor), and the HTTP app and its job queue over them. Nothing else builds a runtime or an app
// for real use; the CLI's commands, the job worker thread and the tests all start here. Imports run one way:
// this file may import any stage, and no stage imports it.

import { createAnswerer, createCompletionClient, createLexiconSource, loadTokenizer, wordVectorsSetting, type Answerer } from './answer/index.js';
import path from 'node:path';
import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import type { FastifyInstance } from 'fastify';
import { buildApp, type AnswerRequest as HttpAnswerRequest, type AppDeps } from './api/app.js';
import { PACKAGE_ROOT, type Config } from './config/index.js';
import { answererOptions, applyHeapGrowth, documentLimits } from './runtime-options.js';
import { resolveEmbedder } from './embed/index.js';
import type { Embedder } from './embed/types.js';
import { createIngestor, type Ingestor, type IngestProgress, type IngestSummary } from './ingest/index.js';
import type { Logger } from './logger.js';
import { createMetrics, type Metrics } from './api/metrics.js';
import { createDeskService } from './api/desk-service.js';
import { createLimiter } from './limiter.js';
import {
  abandonedReason,
  createDocumentService,
  createJobQueue,
  heartbeatMs,
  ownerGone,
  removeStaleIncoming,
  requeueAbandoned,
  thisProcess,
  type DocumentService,
  type LocalDocumentService,
  type JobContext,
  type JobQueue,
} from './jobs/index.js';
import type { CompletionClient } from './answer/index.js';
import { createLexicalChangeThread, createLexicalMemory, createRetriever, type LexicalMemory, createWordNet, packagedWordNetDir, retrieverOptions, type Retriever } from './retrieve/index.js';
import { createOriginals, createVectorIndexes, openStore, storePaths, type JobStore, type Repository, type Store, type VectorIndexes } from './store/index.js';

export interface Runtime {
  config: Readonly<Config>;
  logger: Logger;
  store: Store;
  /** The corpus part of the store (the same object). */
  repo: Repository;
  jobs: JobStore;
  embedder: Embedder;
  embedderReason: string;
  indexes: VectorIndexes;
  retriever: Retriever;
  answerer: Answerer;
  extractiveAnswerer: Answerer;
  ingestor: Ingestor;
  metrics: Metrics;
  /** The in-memory lexical index, when `retrieval.lexicalEngine` is "memory". */
  lexicalIndex?: LexicalMemory;
  close(): void;
}

export async function createRuntime(
  config: Readonly<Config>,
  logger: Logger,
  opts: { onProgress?: (p: IngestProgress) => void; embedder?: Embedder; processMetrics?: boolean; mapDatabase?: boolean } = {},
): Promise<Runtime> {
  // On either back end the runtime works on the SQLite store in dataDir: the whole store on "sqlite"; on
  // "postgres", the node's local copy that its follower keeps (serve) or a worker's scratch store (worker).
  applyHeapGrowth(config);
  const paths = storePaths(config.dataDir);
  const store = openStore(paths.database, { mmap: opts.mapDatabase ?? true });
  const repo: Repository = store;
  const jobs = store.jobs;
  // Jobs a crashed CLI run or server left `running` would stay so for ever: every command that opens the store
  // fails those whose process is gone. (The server's own queue jobs are put back in the queue instead: see
  // createDocumentApi.) A job of a process still running, here or in another process, is left alone.
  const abandoned = jobs.failAbandoned(ownerGone, abandonedReason);
  if (abandoned > 0) logger.warn({ jobs: abandoned }, 'jobs left running by a process that ended were marked failed');
  let embedder: Embedder;
  let embedderReason: string;
  if (opts.embedder) {
    embedder = opts.embedder;
    embedderReason = 'embedder supplied by the caller';
  } else {
    const resolved = await resolveEmbedder({
      modelId: config.embedding.model,
      modelDir: config.embedding.modelDir,
      quantized: config.embedding.quantized,
      batchSize: config.embedding.batchSize,
      hashingDimensions: config.embedding.hashingDimensions,
      provider: config.embedding.provider,
    });
    embedder = resolved.embedder;
    embedderReason = resolved.reason;
  }
  const indexes = createVectorIndexes({
    repo,
    dir: paths.indexDir,
    embedderId: embedder.id,
    dimensions: embedder.dimensions,
    params: config.retrieval.hnsw,
    logger: logger.child({ stage: 'index' }),
    cacheBytes: config.limits.vectorCacheMb * 1024 * 1024,
  });
  const metrics = createMetrics(
    {
      indexSizes: () => repo.listCollections().map((c) => ({ collection: c.name, chunks: c.chunks, documents: c.documents })),
      jobCounts: (collections) => jobs.counts(collections),
    },
    { processMetrics: opts.processMetrics ?? true },
  );
  // Queries share a bounded number of embedding slots; past the queue, requests get 503 + Retry-After
  // rather than waiting behind an ever-longer line. Ingest embeds outside these slots.
  const queryLimiter = createLimiter(config.limits.maxConcurrentQueries, config.limits.maxQueuedQueries, 'query embeddings');
  const queryEmbedder: Embedder = {
    id: embedder.id,
    dimensions: embedder.dimensions,
    semantic: embedder.semantic,
    maxTokens: embedder.maxTokens,
    countTokens: (t) => embedder.countTokens(t),
    embed: (texts) =>
      queryLimiter.run(async () => {
        const end = metrics.embeddingDuration.startTimer({ path: 'query' });
        try {
          return await embedder.embed(texts);
        } finally {
          end();
        }
      }),
  };
  // The in-memory BM25 index loads on a second connection between queries, which FTS5 answers meanwhile; after
  // that it follows the store's lexical change log: a short run of changes is read on a thread of its own and
  // applied between queries, a long one is applied in the background too.
  const lexLog = logger.child({ stage: 'lexical-index' });
  const lexicalIndex =
    config.retrieval.lexicalEngine === 'memory'
      ? createLexicalMemory(store, {
          background: true,
          changeReader: createLexicalChangeThread(paths.database),
          onBuilt: (i) => lexLog.info(i, 'in-memory lexical index built'),
          onError: (err) => lexLog.warn({ err }, 'in-memory lexical index build failed; FTS5 answers meanwhile'),
        })
      : undefined;
  const baseRetriever = createRetriever({
    repo,
    indexes,
    embedder: queryEmbedder,
    options: retrieverOptions(config.retrieval),
    ...(lexicalIndex ? { lexicalIndex } : {}),
    ...(config.retrieval.synonymWeight > 0 ? { synonyms: createWordNet(packagedWordNetDir()) } : {}),
  });
  const answerOptions = answererOptions(config);
  // Loaded once: the encodings' tables take a moment to build.
  const tokenizer = await loadTokenizer(config.answer.tokenizer);
  const answerLog = logger.child({ stage: 'answer' });
  const retrieve = async (q: Parameters<Retriever['search']>[0]) => {
    const end = metrics.retrievalDuration.startTimer({ mode: q.mode });
    try {
      return await baseRetriever.search(q);
    } finally {
      end();
    }
  };
  const retriever: Retriever = { search: retrieve };
  const completionClient = config.completion.baseUrl
    ? createCompletionClient({
        baseUrl: config.completion.baseUrl,
        model: config.completion.model,
        ...(config.completion.apiKey ? { apiKey: config.completion.apiKey } : {}),
        temperature: config.completion.temperature,
        maxTokens: config.completion.maxTokens,
        timeoutMs: config.completion.timeoutMs,
        retries: config.completion.retries,
        breaker: { failureThreshold: config.completion.breakerFailures, coolDownMs: config.completion.breakerCoolDownMs },
      })
    : undefined;
  const completionLimiter = createLimiter(
    config.limits.maxConcurrentCompletions,
    config.limits.maxQueuedCompletions,
    'completion calls',
  );
  // Every completion call, one-shot or streamed, takes a slot and is counted by outcome.
  const counted = (call: () => Promise<string>): Promise<string> =>
    completionLimiter
      .run(async () => {
        try {
          const out = await call();
          metrics.completionCalls.inc({ outcome: 'ok' });
          return out;
        } catch (err) {
          metrics.completionCalls.inc({ outcome: 'error' });
          throw err;
        }
      })
      .catch((err: unknown) => {
        if ((err as { code?: string }).code === 'SB_ERR_BUSY') metrics.completionCalls.inc({ outcome: 'busy' });
        throw err;
      });
  const completion: CompletionClient | undefined = completionClient
    ? {
        complete: (messages, signal) => counted(() => completionClient.complete(messages, signal)),
        ...(completionClient.stream
          ? {
              stream: (messages: Parameters<NonNullable<CompletionClient['stream']>>[0], onDelta: (t: string) => void, signal?: AbortSignal) =>
                counted(() => completionClient.stream!(messages, onDelta, signal)),
            }
          : {}),
      }
    : undefined;
  const lexicon = createLexiconSource({
    generation: (c) => repo.collectionState(c)?.generation ?? null,
    texts: function* (c) {
      for (const d of repo.listDocuments(c)) {
        const t = repo.getDocumentText(d.id);
        if (t) yield t;
      }
    },
    termsDir: config.answer.termsDir ?? path.join(config.dataDir, 'terms'),
    synonyms: createWordNet(packagedWordNetDir()),
    wordVectors: wordVectorsSetting(config.answer.wordVectors),
    onWarning: (msg, detail) => answerLog.warn(detail, msg),
  });
  const answerer = createAnswerer({
    retrieve,
    lexicon,
    embedder: queryEmbedder,
    ...(completion ? { completion } : {}),
    tokenizer,
    logger: answerLog,
    options: answerOptions,
  });
  const extractiveAnswerer = completion
    ? createAnswerer({ retrieve, lexicon, embedder: queryEmbedder, tokenizer, logger: answerLog, options: answerOptions })
    : answerer;
  const ingestor = createIngestor({
    repo,
    indexes,
    embedder,
    options: {
      targetTokens: config.chunking.targetTokens,
      maxTokens: config.chunking.maxTokens,
      overlapTokens: config.chunking.overlapTokens,
      documentMaxBytes: config.limits.documentMaxBytes,
      pdf: { maxPages: config.limits.pdfMaxPages, maxSeconds: config.limits.pdfMaxSeconds },
      limits: documentLimits(config),
    },
    logger: logger.child({ stage: 'ingest' }),
    batchSize: config.embedding.batchSize,
    ...(opts.onProgress ? { onProgress: opts.onProgress } : {}),
  });
  return {
    config,
    logger,
    store,
    repo,
    jobs,
    embedder,
    embedderReason,
    indexes,
    retriever,
    answerer,
    extractiveAnswerer,
    ingestor,
    metrics,
    ...(lexicalIndex ? { lexicalIndex } : {}),
    close() {
      lexicalIndex?.close();
      indexes.close();
      store.close();
    },
  };
}

/** The bounds on one document's work, from the `limits` section. */

/** The answer stage's settings from a config: what the service runs, and what the calibration fit measures. */

/** Runs an ingest as a recorded job, so its outcome can be read back later. */
export async function ingestAsJob(
  rt: Runtime,
  kind: 'ingest' | 'reindex',
  collection: string | null,
  payload: Record<string, unknown>,
  run: () => Promise<IngestSummary>,
): Promise<IngestSummary> {
  const job = rt.jobs.create(kind, collection, payload);
  const owner = thisProcess();
  const leaseMs = rt.config.limits.jobLeaseSeconds * 1000;
  rt.jobs.start(job.id, owner, leaseMs);
  const heartbeat = setInterval(() => rt.jobs.renewLeases(owner.holder, leaseMs), heartbeatMs(leaseMs));
  heartbeat.unref();
  try {
    const summary = await run();
    rt.jobs.succeed(job.id, summary);
    return summary;
  } catch (err) {
    rt.jobs.fail(job.id, (err as Error).message);
    throw err;
  } finally {
    clearInterval(heartbeat);
  }
}

/** The HTTP layer's view of a runtime. */
export function appDeps(
  rt: Runtime,
  isReady: (collection?: string) => boolean,
  documents?: DocumentService,
  queue?: Pick<JobQueue, 'health'>,
  opts: { originalsDir?: string } = {},
): AppDeps {
  return {
    ...(documents ? { documents } : {}),
    ...(queue ? { queueHealth: () => queue.health() } : {}),
    logger: rt.logger,
    isReady,
    metrics: rt.metrics,
    desk: createDeskService({ repo: rt.repo, ratings: rt.store.ratings, originals: createOriginals(opts.originalsDir ?? storePaths(rt.config.dataDir).originalsDir) }),
    search: (req) => rt.retriever.search(req),
    answer: (req: HttpAnswerRequest) => {
      const answerer = req.style === 'extractive' ? rt.extractiveAnswerer : rt.answerer;
      const { style: _style, ...rest } = req;
      return answerer.answer(rest);
    },
    health: () => ({
      embedder: { id: rt.embedder.id, semantic: rt.embedder.semantic, dimensions: rt.embedder.dimensions, note: rt.embedderReason },
      completion: rt.config.completion.baseUrl ? 'configured' : 'none (extractive answers)',
      ready: isReady(),
      ...(rt.lexicalIndex ? { lexicalIndex: rt.lexicalIndex.stats() } : {}),
    }),
    collections: () =>
      rt.repo.listCollections().map((c) => ({ name: c.name, documents: c.documents, chunks: c.chunks, embedderId: c.embedderId })),
  };
}

/** The narrow view of a runtime that jobs and the document API get. */
export function jobContext(rt: Runtime): JobContext {
  return {
    dataDir: rt.config.dataDir,
    maxUploadBytes: rt.config.limits.documentMaxBytes,
    store: rt.store,
    ingestor: rt.ingestor,
    indexes: rt.indexes,
    originals: createOriginals(storePaths(rt.config.dataDir).originalsDir),
    owner: thisProcess(),
    leaseMs: rt.config.limits.jobLeaseSeconds * 1000,
  };
}

/** dist/job-worker.js beside this file when compiled; from src/ (tests) the compiled copy. */
function jobWorkerScript(): string {
  const beside = fileURLToPath(new URL('./job-worker.js', import.meta.url));
  return existsSync(beside) ? beside : path.join(PACKAGE_ROOT, 'dist', 'job-worker.js');
}

/**
 * The document API's back end: a job queue (in a worker thread, or inline on this thread for tests) and the
 * document service over it. Queue jobs that a server which is gone left running go back to the queue first.
 */
export function createDocumentApi(
  rt: Runtime,
  mode: 'thread' | 'inline',
  opts: { onJobDone?: Parameters<typeof createJobQueue>[0]['onJobDone'] } = {},
): { queue: JobQueue; documents: LocalDocumentService } {
  const ctx = jobContext(rt);
  // Uploads a server that stopped was still receiving: no job was made for them, so they would stay for ever.
  const partial = removeStaleIncoming(ctx.dataDir, performance.timeOrigin);
  if (partial.length > 0) rt.logger.warn({ files: partial.length }, 'removed uploads left half-received by a server that stopped');
  requeueAbandoned(ctx);
  const queue = createJobQueue({
    ctx,
    logger: rt.logger,
    mode:
      mode === 'inline'
        ? 'inline'
        : {
            thread: {
              script: jobWorkerScript(),
              workerData: { config: JSON.parse(JSON.stringify(rt.config)) as unknown },
              maxHeapMb: rt.config.limits.jobThreadMaxHeapMb,
              jobMaxSeconds: rt.config.limits.jobMaxSeconds,
            },
          },
    onJobDone: (job) => {
      // The job's rows are in the change log: apply them now rather than in the next query.
      rt.lexicalIndex?.refresh();
      opts.onJobDone?.(job);
    },
  });
  return { queue, documents: createDocumentService(ctx, queue) };
}

/** The HTTP app over a runtime, with the document API and its job queue (run in a worker thread). */
export function createServer(rt: Runtime, opts: { isReady: (collection?: string) => boolean }): { app: FastifyInstance; queue: JobQueue } {
  const { queue, documents } = createDocumentApi(rt, 'thread');
  return { app: buildApp(rt.config, appDeps(rt, opts.isReady, documents, queue)), queue };
}
