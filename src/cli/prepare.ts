// What `serve` does after it starts listening and before it says it is ready: seed an empty store, then bring
// every collection's vector index in step with the database. Until then /health answers and /ready says
// "not ready"; the heavy part (rebuilding an index from the stored vectors) runs in a thread of its own
// (src/index-worker.ts), so the request thread stays free to answer them.

import { existsSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { PACKAGE_ROOT } from '../config/index.js';
import type { FromIndexThread, IndexThreadData } from '../index-worker.js';
import { ingestAsJob, type Runtime } from '../runtime.js';
import { storePaths } from '../store/index.js';

/**
 * Brings these collections' index files in step with the database, somewhere other than the request thread;
 * `onEach` hears of each collection as its file is ready.
 */
export type SyncIndexes = (rt: Runtime, collections: string[], onEach?: (collection: string) => void) => Promise<void>;

/**
 * `onReady` hears of each collection once its vector index is loaded on this thread, so requests about it can
 * be answered while the others still load.
 */
export async function prepare(rt: Runtime, opts: { syncIndexes?: SyncIndexes; onReady?: (collection: string) => void } = {}): Promise<void> {
  const { config: cfg, logger } = rt;
  if (cfg.seed.ingestOnEmpty && rt.repo.countDocuments() === 0) {
    logger.info({ path: cfg.seed.path, collection: cfg.seed.collection }, 'empty store: ingesting the seed folder');
    const s = await ingestAsJob(rt, 'ingest', cfg.seed.collection, { path: cfg.seed.path, reason: 'seed' }, () =>
      rt.ingestor.ingestPath(cfg.seed.path, { collection: cfg.seed.collection }),
    );
    logger.info({ documents: s.documents, chunks: s.chunks, seconds: s.seconds }, 'seed folder ingested');
  }
  const usable: string[] = [];
  for (const c of rt.repo.listCollections()) {
    if (c.embedderId && c.embedderId !== rt.embedder.id) {
      logger.error(
        { collection: c.name, indexedWith: c.embedderId, running: rt.embedder.id },
        'collection was indexed with another embedder: dense and hybrid search are refused until `sourcebound reindex --full`',
      );
      continue;
    }
    usable.push(c.name);
  }
  const syncIndexes = opts.syncIndexes ?? syncIndexesInThread;
  // Each file is at the database's generation once the thread reports it: this only reads it (or patches
  // what changed meanwhile), then the collection can answer.
  const loaded = new Set<string>();
  let loading = Promise.resolve();
  const load = (c: string): Promise<void> =>
    (loading = loading.then(async () => {
      if (loaded.has(c)) return;
      loaded.add(c);
      // The file the thread saved is read off this thread; the sync then only checks it.
      await rt.indexes.preload?.(c);
      const r = rt.indexes.sync(c);
      await rt.indexes.settled(c);
      logger.info({ collection: c, vectors: r.size, rebuilt: r.rebuilt }, 'vector index loaded');
      opts.onReady?.(c);
    }));
  try {
    await syncIndexes(rt, usable, (c) => void load(c));
  } catch (err) {
    logger.warn({ err }, 'the index thread failed; bringing the vector indexes up to date on this thread');
  }
  for (const c of usable) await load(c);
}

/** dist/index-worker.js beside the compiled CLI; from src/ (tests) the compiled copy. */
function indexWorkerScript(): string {
  const beside = fileURLToPath(new URL('../index-worker.js', import.meta.url));
  return existsSync(beside) ? beside : path.join(PACKAGE_ROOT, 'dist', 'index-worker.js');
}

/** The default: a worker thread (src/index-worker.ts) with its own store connection does the work and saves. */
export const syncIndexesInThread: SyncIndexes = (rt, collections, onEach) => {
  if (collections.length === 0) return Promise.resolve();
  const paths = storePaths(rt.config.dataDir);
  const workerData: IndexThreadData = {
    database: paths.database,
    indexDir: paths.indexDir,
    embedderId: rt.embedder.id,
    dimensions: rt.embedder.dimensions,
    params: { ...rt.config.retrieval.hnsw },
    collections,
  };
  return new Promise<void>((resolve, reject) => {
    const w = new Worker(indexWorkerScript(), { workerData });
    let done = false;
    w.on('message', (m: FromIndexThread) => {
      if ('done' in m) done = true;
      else {
        rt.logger.debug({ collection: m.collection, vectors: m.size, rebuilt: m.rebuilt }, 'vector index file brought up to date');
        onEach?.(m.collection);
      }
    });
    w.once('error', reject);
    w.once('exit', (code) => (done ? resolve() : reject(new Error(`the index thread exited with code ${code} before it finished`))));
  });
};
