import { existsSync, mkdirSync } from 'node:fs';
import path from 'node:path';
import { createIndexFiles, newIndex } from './hnsw-files.js';
import { batchesOf, withoutTombstones, countOf, deletedOf, fromFile, needsCompaction, release, tooFar, type Loaded } from './hnsw-state.js';
import type { ChunkStore, CollectionStore, VectorStore } from './types.js';
import type { HnswParams, SyncResult, VectorChange, VectorIndexes, VectorIndexLogger } from './hnsw-types.js';
import { EXACT_SCAN_LIMIT, exactSearch, readThrough, toHits, VectorCache } from './vector-cache.js';

export type { HnswParams, SyncResult, VectorBatches, VectorChange, VectorHit, VectorIndexes, VectorIndexLogger, VectorPoint } from './hnsw-types.js';

/** Stored vectors read per turn of the event loop while the filter's vector cache fills (~5 ms at 384 dims). */
const FILL_SLICE = 512;

export function createVectorIndexes(deps: {
  repo: Pick<CollectionStore, 'collectionState' | 'getCollection'> & Pick<ChunkStore, 'chunksOfCollection'> & Pick<VectorStore, 'getVectors' | 'chunkVectors'>;
  dir: string;
  embedderId: string;
  dimensions: number;
  params: HnswParams;
  logger?: VectorIndexLogger;
  /** Most bytes of stored vectors the filter's vector cache holds per collection (default: no bound). */
  cacheBytes?: number;
}): VectorIndexes {
  const { repo, dir, embedderId, dimensions, params, logger } = deps;
  const cacheEntries = deps.cacheBytes === undefined ? Number.POSITIVE_INFINITY : Math.max(1, Math.floor(deps.cacheBytes / (4 * dimensions)));
  const loaded = new Map<string, Loaded>();
  const caches = new Map<string, VectorCache>();
  const read = (ids: number[]): ReadonlyMap<number, Float32Array> => repo.chunkVectors(embedderId, ids);
  /** The collection's vector cache, made on first use with room for `capacity` (a filter's fill wants them all, the feedback a few). */
  const cacheOf = (c: string, capacity: number): VectorCache => {
    let cache = caches.get(c);
    if (!cache) caches.set(c, (cache = new VectorCache(dimensions, capacity, cacheEntries)));
    return cache;
  };
  /** Work under way off the query path, per collection: reads of later files, fills of the vector cache. */
  const reading = new Map<string, Promise<void>>();
  const filling = new Map<string, Promise<void>>();
  const filled = new WeakSet<Loaded>();
  let epoch = 0;
  mkdirSync(dir, { recursive: true });
  const files = createIndexFiles(dir);

  const emptyState = (capacity: number): Loaded => {
    const index = newIndex(dimensions, capacity, params);
    index.setEf(params.efSearch);
    return {
      index,
      meta: { version: 1, embedderId, dimensions, generation: -1, file: '', m: params.m, efConstruction: params.efConstruction, deleted: [] },
      live: new Set(),
      saved: false,
    };
  };

  const save = (c: string, state: Loaded, generation: number): void => {
    try {
      const { file: _f, generation: _g, ...rest } = state.meta;
      const written = files.save(c, state.index, { ...rest, deleted: [...deletedOf(state)] }, generation);
      state.meta = written ?? { ...state.meta, generation };
      state.saved = written !== null;
    } catch (err) {
      // A read-only data folder still serves queries from memory.
      state.meta = { ...state.meta, generation };
      logger?.warn({ collection: c, err: (err as Error).message }, 'could not save vector index');
    }
  };

  const tryLoad = (c: string): Loaded | null => {
    const r = files.load(c, { embedderId, dimensions });
    if (!r.index) {
      if (r.reason) logger?.warn({ collection: c, reason: r.reason }, 'vector index file not usable; rebuilding');
      return null;
    }
    return fromFile(r.index, r.meta, params.efSearch);
  };

  const room = (state: Loaded, more: number): void => {
    const needed = state.index.getCurrentCount() + more;
    if (needed > state.index.getMaxElements()) state.index.resizeIndex(Math.ceil(needed * 1.25) + 16);
  };

  const remove = (c: string, state: Loaded, id: number): boolean => {
    if (!state.live.has(id)) return false;
    state.index.markDelete(id);
    state.live.delete(id);
    caches.get(c)?.delete(id);
    return true;
  };

  /** The collection held no chunk before this change: all it holds now is what the change added. */
  const firstWrite = (c: string, change: VectorChange): boolean => {
    const now = repo.getCollection(c);
    return change.removed.length === 0 && now !== null && now.generation === change.generation && now.chunks === countOf(change.added);
  };

  // hnswlib-node takes a plain array; one is filled per point (Array.from costs ~0.25 ms at 4,096 dimensions).
  const plain = new Array<number>(dimensions).fill(0);
  const addPoint = (c: string, state: Loaded, id: number, v: Float32Array): void => {
    for (let i = 0; i < dimensions; i++) plain[i] = v[i]!;
    state.index.addPoint(plain, id);
    state.live.add(id);
    caches.get(c)?.set(id, v);
  };

  /** Fills the collection's vector cache from the stored vectors, a slice per turn of the event loop. */
  const fill = (c: string): void => {
    const state = loaded.get(c);
    // Once per index in memory (a read of a later file brings a new one): finding what is missing walks every point.
    if (!state || filling.has(c) || filled.has(state)) return;
    filled.add(state);
    const cache = cacheOf(c, state.live.size + 16);
    if (cache.size > state.live.size * 1.25 + 64) cache.retain(state.live);
    // A collection larger than the cache's bound is not filled ahead: filtered scans cache what they read.
    if (state.live.size > cache.maxEntries) return;
    const todo = cache.missing(state.live);
    if (todo.length === 0) return;
    const mine = epoch;
    const held = cache;
    const run = (async () => {
      for (let i = 0; i < todo.length; i += FILL_SLICE) {
        await new Promise<void>((resolve) => setImmediate(resolve));
        if (mine !== epoch || caches.get(c) !== held) return;
        const live = loaded.get(c)?.live;
        const slice = todo.slice(i, i + FILL_SLICE).filter((id) => live?.has(id) && !held.has(id));
        for (const [id, v] of repo.chunkVectors(embedderId, slice)) held.set(id, v);
      }
    })()
      .catch((err: Error) => logger?.warn({ collection: c, err: err.message }, 'could not fill the vector cache'))
      .finally(() => filling.delete(c));
    filling.set(c, run);
  };

  /** Puts a graph read from its file in place of `base` (freed). */
  const install = (c: string, next: Loaded, base: Loaded | null): Loaded => {
    loaded.set(c, next);
    if (base) release(base.index);
    return next;
  };

  /** Reads the later file a writer saved off the thread; the index in memory answers until it is ready. */
  const readLater = (c: string, base: Loaded, disk: number): void => {
    const mine = epoch;
    const run = files
      .loadAsync(c, { embedderId, dimensions })
      .then((r) => {
        // Dropped when something else moved this collection's index meanwhile (a write here, a close).
        if (mine !== epoch || loaded.get(c) !== base) return;
        if (!r.index) {
          if (r.reason) logger?.warn({ collection: c, reason: r.reason }, 'later vector index file not usable; keeping the one in memory');
          return;
        }
        if (r.meta.generation <= base.meta.generation) return;
        const { live } = install(c, fromFile(r.index, r.meta, params.efSearch), base);
        const cache = caches.get(c);
        if (cache && cache.size > live.size * 1.25 + 64) cache.retain(live);
        logger?.info({ collection: c, generation: r.meta.generation, from: disk }, 'vector index loaded from the file a writer saved');
      })
      .catch((err: Error) => logger?.warn({ collection: c, err: err.message }, 'could not read the later vector index file'))
      .finally(() => {
        if (reading.get(c) === run) reading.delete(c);
      });
    reading.set(c, run);
  };

  /** Marks deleted what `rows` no longer holds and adds what is missing, from the stored vectors. */
  const patch = (c: string, state: Loaded, rows: readonly { id: number; chunkHash: string }[], wanted: ReadonlyMap<number, string>) => {
    let removed = 0;
    for (const id of [...state.live]) if (!wanted.has(id) && remove(c, state, id)) removed++;
    const missing = rows.filter((r) => !state.live.has(r.id));
    const vectors = repo.getVectors(embedderId, missing.map((r) => r.chunkHash));
    room(state, missing.length);
    let added = 0;
    let withoutVector = 0;
    for (const r of missing) {
      const v = vectors.get(r.chunkHash);
      if (!v || v.length !== dimensions) {
        withoutVector++;
        continue;
      }
      addPoint(c, state, r.id, v);
      added++;
    }
    if (withoutVector > 0) logger?.warn({ collection: c, chunks: withoutVector }, 'chunks without a stored vector for this embedder are not in the vector index');
    if (added + removed > 0) state.saved = false;
    return { added, removed };
  };

  /** The whole check against the database: load, patch or rebuild. Writers, and a reader's first look. */
  const check = (c: string, state: Loaded | null, generation: number): { state: Loaded; added: number; removed: number; rebuilt: boolean; loaded: boolean } => {
    const rows = repo.chunksOfCollection(c);
    const wanted = new Map(rows.map((r) => [r.id, r.chunkHash] as const));
    let fromDisk = false;
    const disk = files.savedGeneration(c);
    if (!state || (disk !== null && disk > state.meta.generation && disk <= generation)) {
      // A file at a later generation (a full re-index's, say) costs less to load and patch than patching here.
      const next = tryLoad(c);
      if (next) {
        if (state) release(state.index);
        state = next;
        fromDisk = true;
      }
    }
    let rebuilt = false;
    if (state && tooFar(state, wanted)) {
      release(state.index);
      state = null;
    }
    if (!state) {
      state = emptyState(rows.length + 16);
      rebuilt = true;
      fromDisk = false;
    }
    const { added, removed } = patch(c, state, rows, wanted);
    if (rebuilt && rows.length > 0) logger?.info({ collection: c, vectors: added }, 'vector index rebuilt from stored vectors');
    return { state, added, removed, rebuilt, loaded: fromDisk };
  };

  const sync: VectorIndexes['sync'] = (c, opts = {}) => {
    const persist = opts.persist ?? true;
    const generation = opts.generation ?? repo.collectionState(c)?.generation ?? 0;
    let state = loaded.get(c) ?? null;
    if (state && state.meta.generation === generation && (state.saved || !persist)) {
      if (!persist || !needsCompaction(state)) return { added: 0, removed: 0, rebuilt: false, size: state.live.size };
    }
    if (!persist && state) {
      // The query path: a later file saved by a writer is read whole, off the thread; nothing is patched or
      // rebuilt here. One read at a time: a file saved during it is read by the first sync after it ends.
      if (reading.has(c)) return { added: 0, removed: 0, rebuilt: false, size: state.live.size, loading: true };
      const disk = files.savedGeneration(c);
      if (disk !== null && disk > state.meta.generation) {
        readLater(c, state, disk);
        return { added: 0, removed: 0, rebuilt: false, size: state.live.size, loading: true };
      }
      return { added: 0, removed: 0, rebuilt: false, size: state.live.size };
    }
    let added = 0;
    let removed = 0;
    let rebuilt = false;
    let fromDisk = false;
    if (!state || state.meta.generation !== generation) {
      const r = check(c, state, generation);
      ({ state, added, removed, rebuilt } = r);
      fromDisk = r.loaded;
      // Saved again even when nothing changed in the graph (a rename moves no vector), so that the file names the
      // generation readers compare against.
      if (added + removed > 0 || rebuilt || state.meta.generation !== generation) state.saved = false;
      state.meta = { ...state.meta, generation };
    }
    loaded.set(c, state);
    if (!persist) return { added, removed, rebuilt, size: state.live.size, loaded: fromDisk };
    // Saved first, so the change is searchable by every reader before any compaction starts.
    if (!state.saved) save(c, state, generation);
    let compacted = false;
    if (needsCompaction(state)) {
      const before = deletedOf(state).size;
      const old = state;
      state = withoutTombstones(state, emptyState);
      release(old.index);
      loaded.set(c, state);
      save(c, state, generation);
      compacted = true;
      logger?.info({ collection: c, tombstones: before, vectors: state.live.size }, 'vector index compacted');
    }
    return { added, removed, rebuilt, size: state.live.size, loaded: fromDisk, compacted };
  };

  const apply: VectorIndexes['apply'] = (c, change) => {
    let state = loaded.get(c) ?? null;
    if (!state || state.meta.generation !== change.generation - 1) {
      const stale = state;
      // Another writer (the request thread deleting a document, a CLI run) saved since this one last looked.
      const saved = files.savedGeneration(c);
      if (!state && saved === null && firstWrite(c, change)) {
        // The collection's first chunks: the graph grows document by document from empty, instead of the
        // closing sync reading every vector back from the store to build it.
        state = emptyState(Math.max(1024, countOf(change.added) + 16));
        state.meta = { ...state.meta, generation: change.generation - 1 };
      } else {
        if (saved !== change.generation - 1) return false;
        state = tryLoad(c);
        if (!state || state.meta.generation !== change.generation - 1) return false;
      }
      if (stale) release(stale.index);
      loaded.set(c, state);
    }
    for (const id of change.removed) remove(c, state, id);
    room(state, countOf(change.added));
    for (const batch of batchesOf(change.added)) {
      for (const { id, vector } of batch) {
        if (state.live.has(id) || vector.length !== dimensions) continue;
        addPoint(c, state, id, vector);
      }
    }
    state.meta = { ...state.meta, generation: change.generation };
    state.saved = false;
    return true;
  };

  const adopt: VectorIndexes['adopt'] = (from, to, generation, rows) => {
    const wanted = new Map(rows.map((r) => [r.id, r.chunkHash] as const));
    let state = loaded.get(from) ?? tryLoad(from);
    if (state && tooFar(state, wanted)) {
      release(state.index);
      state = null;
    }
    if (!state) state = emptyState(rows.length + 16);
    patch(to, state, rows, wanted);
    state.saved = false;
    const shadowFile = files.readMeta(from)?.file;
    save(to, state, generation);
    files.remove(from, state.meta.file === shadowFile ? state.meta.file : undefined);
    loaded.delete(from);
    loaded.set(to, state);
  };

  return {
    sync,
    apply,
    adopt,
    discard(c) {
      const state = loaded.get(c);
      if (state) release(state.index);
      loaded.delete(c);
      caches.delete(c);
      files.remove(c);
    },
    savedGeneration(c) {
      const meta = files.readMeta(c);
      return meta && meta.file && existsSync(path.join(deps.dir, meta.file)) ? meta.generation : null;
    },
    search(c, vector, k, allowed) {
      const state = loaded.get(c);
      if (!state || state.live.size === 0) return [];
      const query = Array.from(vector);
      if (allowed) {
        const ids = [...allowed].filter((id) => state.live.has(id));
        const n = Math.min(k, ids.length);
        if (n === 0) return [];
        // Below a few thousand allowed vectors an exact scan costs about what a filtered graph walk does,
        // and a graph walk through a sparse filter can strand itself in regions with no allowed node.
        if (ids.length <= EXACT_SCAN_LIMIT) {
          fill(c);
          return exactSearch(ids, vector, n, caches.get(c) ?? null, read);
        }
        let ef = Math.max(params.efSearch, n);
        for (;;) {
          state.index.setEf(ef);
          const res = state.index.searchKnn(query, n, (label) => allowed.has(label));
          if (res.neighbors.length >= n || ef >= ids.length) {
            state.index.setEf(params.efSearch);
            return res.neighbors.length >= n ? toHits(res) : exactSearch(ids, vector, n, caches.get(c) ?? null, read);
          }
          ef *= 4;
        }
      }
      const n = Math.min(k, state.live.size);
      state.index.setEf(Math.max(params.efSearch, n));
      return toHits(state.index.searchKnn(query, n));
    },
    size(c) {
      return loaded.get(c)?.live.size ?? 0;
    },
    deletedCount(c) {
      const state = loaded.get(c);
      return state ? state.index.getCurrentCount() - state.live.size : 0;
    },
    async settled(c) {
      for (;;) {
        const busy = c === undefined ? [...reading.values(), ...filling.values()] : [reading.get(c), filling.get(c)].filter((p) => p !== undefined);
        if (busy.length === 0) return;
        await Promise.all(busy);
      }
    },
    cachedVectors(c) {
      return caches.get(c)?.size ?? 0;
    },
    async preload(c) {
      const base = loaded.get(c) ?? null;
      const disk = files.savedGeneration(c);
      if (disk === null || (base && base.meta.generation >= disk)) return;
      const mine = epoch;
      const r = await files.loadAsync(c, { embedderId, dimensions }).catch((err: Error) => ({ index: null, reason: err.message }));
      // Left to the next sync when something moved this collection's index meanwhile, or the file is not usable.
      if (!r.index || mine !== epoch || (loaded.get(c) ?? null) !== base || (base && r.meta.generation <= base.meta.generation)) return;
      install(c, fromFile(r.index, r.meta, params.efSearch), base);
    },
    vectors(c, ids) {
      const state = loaded.get(c);
      const cache = state ? cacheOf(c, Math.min(state.live.size + 16, 1024)) : null;
      return readThrough(cache, ids, read, (id) => state?.live.has(id) ?? false);
    },
    close() {
      epoch++;
      for (const state of loaded.values()) release(state.index);
      loaded.clear();
      caches.clear();
      reading.clear();
      filling.clear();
    },
  };
}
