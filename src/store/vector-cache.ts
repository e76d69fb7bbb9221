// The stored vectors of a collection's live points, kept in memory beside its graph by the process that answers
// queries, for the exact scan of a selective filter: reading a thousand scattered vectors from SQLite costs
// milliseconds a query, copying them out of hnswlib (getPoint) more. Chunk ids are never handed out twice
// (AUTOINCREMENT), so an id's vector never changes: an entry stays right across generations, and only entries of
// points that left the index need dropping. It holds at most `maxEntries` vectors (`limits.vectorCacheMb`): past
// that, the entry cached longest ago makes room (first in, first out), so memory stays bounded whatever the
// collection's size; an id it no longer holds is read from the store again.
import type { VectorHit } from './hnsw-types.js';

/** Allowed sets up to this size are scanned exactly instead of walking the graph through a filter. */
export const EXACT_SCAN_LIMIT = 2000;

export class VectorCache {
  private data: Float32Array;
  private readonly slots = new Map<number, number>();
  private readonly free: number[] = [];
  private used = 0;

  readonly maxEntries: number;

  constructor(readonly dimensions: number, capacity = 1024, maxEntries = Number.POSITIVE_INFINITY) {
    this.maxEntries = Math.max(1, Math.floor(maxEntries));
    this.data = new Float32Array(Math.max(1, Math.min(capacity, this.maxEntries)) * dimensions);
  }

  get size(): number {
    return this.slots.size;
  }

  /** Bytes of vector storage held (the slab, used or not). */
  get bytes(): number {
    return this.data.byteLength;
  }

  has(id: number): boolean {
    return this.slots.has(id);
  }

  /** A view into the slab: valid until the next `set`, which may move it. */
  get(id: number): Float32Array | undefined {
    const slot = this.slots.get(id);
    return slot === undefined ? undefined : this.data.subarray(slot * this.dimensions, (slot + 1) * this.dimensions);
  }

  set(id: number, vector: Float32Array): void {
    if (vector.length !== this.dimensions) return;
    let slot = this.slots.get(id);
    if (slot === undefined) {
      if (this.slots.size >= this.maxEntries) {
        // Full: the oldest entry (a Map iterates in insertion order) gives up its slot.
        const [oldest, its] = this.slots.entries().next().value as [number, number];
        this.slots.delete(oldest);
        this.free.push(its);
      }
      slot = this.free.pop() ?? this.used++;
      if ((slot + 1) * this.dimensions > this.data.length) {
        const grown = new Float32Array(Math.min(Math.ceil((slot + 1) * 1.5), this.maxEntries) * this.dimensions);
        grown.set(this.data);
        this.data = grown;
      }
      this.slots.set(id, slot);
    }
    this.data.set(vector, slot * this.dimensions);
  }

  delete(id: number): void {
    const slot = this.slots.get(id);
    if (slot === undefined) return;
    this.slots.delete(id);
    this.free.push(slot);
  }

  /** Drops every entry whose id is not in `live` (points another writer removed). */
  retain(live: ReadonlySet<number>): void {
    for (const id of [...this.slots.keys()]) if (!live.has(id)) this.delete(id);
  }

  /** The ids of `ids` not held. */
  missing(ids: Iterable<number>): number[] {
    const out: number[] = [];
    for (const id of ids) if (!this.slots.has(id)) out.push(id);
    return out;
  }

  /** Inner product of `query` with the vector of `id` (which must be held). */
  dot(id: number, query: Float32Array): number {
    const base = this.slots.get(id)! * this.dimensions;
    const d = this.data;
    let s = 0;
    for (let i = 0; i < query.length; i++) s += query[i]! * d[base + i]!;
    return s;
  }
}

/** The exact top n of `ids` by inner product: from the cache where it holds them, the rest from `read`. */
export function exactSearch(
  ids: readonly number[],
  query: Float32Array,
  n: number,
  cache: VectorCache | null,
  read: (ids: number[]) => ReadonlyMap<number, Float32Array>,
): VectorHit[] {
  const scored: VectorHit[] = [];
  const absent = cache ? cache.missing(ids) : [...ids];
  // The held ones first: adding the others to a full cache pushes entries out, perhaps some of these.
  if (cache) {
    const fresh = new Set(absent);
    for (const id of ids) if (!fresh.has(id)) scored.push({ chunkId: id, score: cache.dot(id, query) });
  }
  if (absent.length > 0) {
    for (const [id, v] of read(absent)) {
      let s = 0;
      for (let i = 0; i < query.length; i++) s += query[i]! * v[i]!;
      scored.push({ chunkId: id, score: s });
      cache?.set(id, v);
    }
  }
  return scored.sort((a, b) => b.score - a.score || a.chunkId - b.chunkId).slice(0, n);
}

/**
 * The vectors of `ids` in ascending id order (the store's own order, so sums over them come out the same to the
 * last bit): copied from the cache where it holds them (a view changes when its slot goes to another vector), the
 * rest from `read`, and those kept in the cache when `keep` says the index holds them.
 */
export function readThrough(
  cache: VectorCache | null,
  ids: readonly number[],
  read: (ids: number[]) => ReadonlyMap<number, Float32Array>,
  keep: (id: number) => boolean,
): Map<number, Float32Array> {
  const sorted = [...new Set(ids)].sort((a, b) => a - b);
  const held = new Map<number, Float32Array>();
  for (const id of sorted) {
    const v = cache?.get(id);
    if (v) held.set(id, Float32Array.from(v));
  }
  const fetched = sorted.length > held.size ? read(sorted.filter((id) => !held.has(id))) : new Map<number, Float32Array>();
  const out = new Map<number, Float32Array>();
  for (const id of sorted) {
    const v = held.get(id) ?? fetched.get(id);
    if (!v) continue;
    out.set(id, v);
    if (!held.has(id) && keep(id)) cache?.set(id, v);
  }
  return out;
}

/** hnswlib's answer (inner-product distances) as hits with cosine scores (vectors are unit length). */
export function toHits(res: { neighbors: number[]; distances: number[] }): VectorHit[] {
  const hits: VectorHit[] = [];
  for (let i = 0; i < res.neighbors.length; i++) hits.push({ chunkId: res.neighbors[i]!, score: 1 - res.distances[i]! });
  return hits;
}
