// The start-up index thread: brings each collection's vector index file in step with the database (loading,
// patching or rebuilding it from the stored vectors, then saving it), off the thread that serves requests.
// Rebuilding a large collection's index takes seconds of CPU; on the request thread it would hold up every
// request, /health and /ready included. This thread needs no embedder: only the store and the index files.
// When it is done the request thread loads each saved file (src/cli/prepare.ts).
import { parentPort, workerData } from 'node:worker_threads';
import { createVectorIndexes, openStore, type HnswParams } from './store/index.js';

export interface IndexThreadData {
  database: string;
  indexDir: string;
  embedderId: string;
  dimensions: number;
  params: HnswParams;
  collections: string[];
}

/** Messages from this thread: one per collection brought in step, then the end. */
export type FromIndexThread = { collection: string; size: number; rebuilt: boolean } | { done: true };

const data = workerData as IndexThreadData;
const store = openStore(data.database, { mmap: false });
try {
  const indexes = createVectorIndexes({ repo: store, dir: data.indexDir, embedderId: data.embedderId, dimensions: data.dimensions, params: data.params });
  for (const c of data.collections) {
    const r = indexes.sync(c);
    parentPort?.postMessage({ collection: c, size: r.size, rebuilt: r.rebuilt } satisfies FromIndexThread);
    indexes.close();
  }
} finally {
  store.close();
}
parentPort?.postMessage({ done: true } satisfies FromIndexThread);
