// A collection's graph in memory as the vector index (hnsw-index.ts) holds it: its state, when it is due for a
// rebuild or compaction, the points a change adds, and freeing a graph that is dropped.

import type { Hnsw, IndexMeta } from './hnsw-files.js';
import type { VectorBatches, VectorChange, VectorPoint } from './hnsw-types.js';

/**
 * Past this share of tombstones a writer builds the graph again. Deleted points stay in the graph as waypoints
 * (hnswlib's markDelete), so searches still visit them; a quarter is a rule of thumb, not a measured optimum.
 */
const COMPACT_SHARE = 0.25;
const COMPACT_MIN = 256;

export interface Loaded {
  index: Hnsw;
  meta: IndexMeta;
  live: Set<number>;
  /** False while memory is ahead of the file on disk. */
  saved: boolean;
}

/** The same points in a new graph (made by `empty`), without the tombstones, added in id order. */
export function withoutTombstones(state: Loaded, empty: (capacity: number) => Loaded): Loaded {
  const next = empty(state.live.size + 16);
  for (const id of [...state.live].sort((a, b) => a - b)) {
    next.index.addPoint(state.index.getPoint(id), id);
    next.live.add(id);
  }
  next.meta = { ...next.meta, generation: state.meta.generation };
  return next;
}

/** The state of a graph read from its saved file (which holds its tombstones in `meta.deleted`). */
export function fromFile(index: Hnsw, meta: IndexMeta, efSearch: number): Loaded {
  index.setEf(efSearch);
  const deleted = new Set(meta.deleted);
  return { index, meta, live: new Set(index.getIdsList().filter((id) => !deleted.has(id))), saved: true };
}

// Past a third of the graph in tombstones and missing points, patching costs about what a rebuild does.
export function tooFar(state: Loaded, wanted: ReadonlyMap<number, string>): boolean {
  let stale = 0;
  for (const id of state.live) if (!wanted.has(id)) stale++;
  const missing = wanted.size - (state.live.size - stale);
  return stale + missing + deletedOf(state).size > Math.max(64, state.index.getCurrentCount() / 3);
}

export function needsCompaction(state: Loaded): boolean {
  const deleted = state.index.getCurrentCount() - state.live.size;
  return deleted >= COMPACT_MIN && deleted > state.index.getCurrentCount() * COMPACT_SHARE;
}

export function deletedOf(state: Loaded): Set<number> {
  const all = state.index.getIdsList();
  return new Set(all.filter((id) => !state.live.has(id)));
}

const isBatches = (added: VectorChange['added']): added is VectorBatches => !Array.isArray(added);

/** How many points a change adds (read before the first batch, to size the graph once). */
export const countOf = (added: VectorChange['added']): number => (isBatches(added) ? added.count : (added as readonly VectorPoint[]).length);

/** A change's added points, a batch at a time. */
export const batchesOf = (added: VectorChange['added']): Iterable<readonly VectorPoint[]> =>
  isBatches(added) ? added.batches() : [added as readonly VectorPoint[]];

/**
 * Frees a graph's native memory now. hnswlib-node does not tell V8 what its graphs hold (dimensions × 4 bytes a
 * point and more), so a dropped graph would wait for a garbage collection V8 has no reason to start; a new
 * one-point graph in its place deletes the old one (the binding's initIndex). Only for a graph nothing will
 * search again.
 */
export function release(index: Hnsw): void {
  try {
    index.initIndex({ maxElements: 1 });
  } catch {
    /* already unusable: nothing more to free */
  }
}
