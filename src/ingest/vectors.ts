// A document's vectors, a batch at a time: made and stored ahead of its chunks, then read back into the vector
// index after the chunks are written. What the job thread holds does not grow with the document's length
// (4,096 hashing dimensions are 16 KB a vector; a 10,000-chunk document would be 160 MB at once).

import type { Embedder } from '../embed/types.js';
import type { Repository, VectorBatches } from '../store/index.js';

/**
 * Vectors of one document held at once while it is embedded and indexed: 256 are 4 MiB at 4,096 dimensions
 * (the hashing embedder) and 0.4 MiB at 384 (the default model).
 */
export const VECTOR_BATCH = 256;

/**
 * Embeds every distinct chunk hash that has no stored vector yet and stores the vectors, `vectorBatch` at a time
 * (`embedBatch` texts per call to the embedder); returns how many were embedded. `textOf(i)` makes chunk i's
 * embed text when it is needed, so no list of them is kept. The vectors table is a cache by chunk hash that
 * outlives any chunk, so vectors stored before their chunks are safe: a document that fails afterwards leaves
 * only rows a later chunk with the same text reuses.
 */
export async function embedAndStore(
  repo: Pick<Repository, 'vectorHashes' | 'putVectors'>,
  embedder: Embedder,
  hashes: readonly string[],
  textOf: (i: number) => string,
  opts: { embedBatch: number; vectorBatch: number },
): Promise<number> {
  const stored = repo.vectorHashes(embedder.id, hashes);
  // First occurrence of each hash without a stored vector, in document order.
  const todo = new Map<string, number>();
  hashes.forEach((h, i) => {
    if (!stored.has(h) && !todo.has(h)) todo.set(h, i);
  });
  const unique = [...todo];
  for (let at = 0; at < unique.length; at += opts.vectorBatch) {
    const part = unique.slice(at, at + opts.vectorBatch);
    const vectors = new Map<string, Float32Array>();
    for (let i = 0; i < part.length; i += opts.embedBatch) {
      const batch = part.slice(i, i + opts.embedBatch);
      const out = await embedder.embed(batch.map(([, index]) => textOf(index)));
      batch.forEach(([hash], j) => vectors.set(hash, out[j]!));
    }
    repo.putVectors(embedder.id, vectors);
  }
  return unique.length;
}

/** The stored vectors of `chunkIds`, read `vectorBatch` at a time as the vector index takes them. */
export function storedVectors(repo: Pick<Repository, 'chunkVectors'>, modelId: string, chunkIds: readonly number[], vectorBatch: number): VectorBatches {
  return {
    count: chunkIds.length,
    *batches() {
      for (let at = 0; at < chunkIds.length; at += vectorBatch) {
        const ids = chunkIds.slice(at, at + vectorBatch);
        const found = repo.chunkVectors(modelId, ids);
        yield ids.flatMap((id) => {
          const vector = found.get(id);
          return vector ? [{ id, vector }] : [];
        });
      }
    },
  };
}
