import { closeSync, existsSync, fsyncSync, mkdirSync, openSync, readFileSync, renameSync, unlinkSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { threadId } from 'node:worker_threads';
import hnswlib from 'hnswlib-node';
import type { ChunkStore, CollectionStore, VectorStore } from './types.js';

const { HierarchicalNSW } = hnswlib;
type Hnsw = InstanceType<typeof HierarchicalNSW>;

export interface HnswParams {
  m: number;
  efConstruction: number;
  efSearch: number;
}

export interface VectorHit {
  chunkId: number;
  /** Cosine similarity (vectors are unit length, so 1 - inner-product distance). */
  score: number;
}

/** Written beside each index file; renaming it into place is the commit point of a save. */
interface IndexMeta {
  version: 1;
  embedderId: string;
  dimensions: number;
  generation: number;
  file: string;
  m: number;
  efConstruction: number;
  /** Labels marked deleted (hnswlib keeps them in getIdsList). */
  deleted: number[];
}

interface Loaded {
  index: Hnsw;
  meta: IndexMeta;
  live: Set<number>;
  /** False while memory is ahead of the file on disk (a query-path sync does not write files). */
  saved: boolean;
}

export interface VectorIndexLogger {
  info(obj: object, msg: string): void;
  warn(obj: object, msg: string): void;
}

export interface VectorIndexes {
  /**
   * Brings the collection's index in step with the database (loading, patching or rebuilding it). With
   * `persist: false` (the query path) only memory changes: writers save, readers do not rewrite files.
   * `generation`: the collection's generation when the caller has just read it (saves a lookup per query).
   */
  sync(collection: string, opts?: { persist?: boolean; generation?: number }): { added: number; removed: number; rebuilt: boolean; size: number };
  /**
   * Makes the index of collection `from` (a shadow built by a full re-index) the index of `to` at
   * `generation`, holding exactly `rows`: saved under `to`'s name before the database switches, so that every
   * reader, in this process or another, swaps by loading one file instead of rebuilding. `from`'s files go.
   */
  adopt(from: string, to: string, generation: number, rows: readonly { id: number; chunkHash: string }[]): void;
  /** Drops a collection's in-memory index and its files (a shadow collection that was given up). */
  discard(collection: string): void;
  /** The generation the collection's saved index holds (its description file only), or null when none is whole on disk. */
  savedGeneration(collection: string): number | null;
  /**
   * The k nearest live vectors; with `allowed`, only among those chunk ids, and still k of them when that
   * many exist (the filter runs inside the graph search, with an exact scan when it is very selective).
   */
  search(collection: string, vector: Float32Array, k: number, allowed?: ReadonlySet<number>): VectorHit[];
  size(collection: string): number;
  /** Forgets in-memory state, e.g. before closing. */
  close(): void;
}

const SAFE_NAME = /^[A-Za-z0-9._-]+$/;

export function createVectorIndexes(deps: {
  repo: Pick<CollectionStore, 'collectionState'> & Pick<ChunkStore, 'chunksOfCollection'> & Pick<VectorStore, 'getVectors'>;
  dir: string;
  embedderId: string;
  dimensions: number;
  params: HnswParams;
  logger?: VectorIndexLogger;
}): VectorIndexes {
  const { repo, dir, embedderId, dimensions, params, logger } = deps;
  const loaded = new Map<string, Loaded>();
  mkdirSync(dir, { recursive: true });

  const metaPath = (c: string): string => path.join(dir, `${fileSafe(c)}.meta.json`);

  const readMeta = (c: string): IndexMeta | null => {
    try {
      const m = JSON.parse(readFileSync(metaPath(c), 'utf8')) as IndexMeta;
      return m.version === 1 ? m : null;
    } catch {
      return null;
    }
  };

  const fresh = (capacity: number): Hnsw => {
    const idx = new HierarchicalNSW('ip', dimensions);
    idx.initIndex({ maxElements: Math.max(16, capacity), m: params.m, efConstruction: params.efConstruction, randomSeed: 100 });
    idx.setEf(params.efSearch);
    return idx;
  };

  const save = (c: string, state: Loaded, generation: number): void => {
    const file = `${fileSafe(c)}.g${generation}.hnsw`;
    const full = path.join(dir, file);
    // The job worker thread shares the process id with the request thread: both name their temporaries.
    const tmp = `${full}.tmp-${process.pid}-${threadId}`;
    state.index.writeIndexSync(tmp);
    fsyncFile(tmp);
    renameSync(tmp, full);
    const old = state.meta.file;
    state.meta = { ...state.meta, generation, file, deleted: [...deletedOf(state)] };
    const metaTmp = `${metaPath(c)}.tmp-${process.pid}-${threadId}`;
    writeFileSync(metaTmp, JSON.stringify(state.meta));
    fsyncFile(metaTmp);
    renameSync(metaTmp, metaPath(c));
    fsyncDir(dir);
    state.saved = true;
    if (old && old !== file) {
      try {
        unlinkSync(path.join(dir, old));
      } catch {
        /* another process may have removed it already */
      }
    }
  };

  const tryLoad = (c: string): Loaded | null => {
    const meta = readMeta(c);
    if (!meta) return null;
    if (meta.embedderId !== embedderId || meta.dimensions !== dimensions) {
      logger?.warn({ collection: c, indexEmbedder: meta.embedderId, embedder: embedderId }, 'vector index was built with another embedder; rebuilding');
      return null;
    }
    const file = path.join(dir, meta.file);
    if (!existsSync(file)) return null;
    try {
      const index = new HierarchicalNSW('ip', dimensions);
      index.readIndexSync(file);
      index.setEf(params.efSearch);
      const deleted = new Set(meta.deleted);
      const live = new Set(index.getIdsList().filter((id) => !deleted.has(id)));
      return { index, meta, live, saved: true };
    } catch (err) {
      logger?.warn({ collection: c, err: (err as Error).message }, 'vector index file unreadable; rebuilding');
      return null;
    }
  };

  // Past a third of the graph in tombstones and missing points, patching costs about what a rebuild does.
  const tooFar = (state: Loaded, wanted: ReadonlyMap<number, string>): boolean => {
    let stale = 0;
    for (const id of state.live) if (!wanted.has(id)) stale++;
    const missing = wanted.size - (state.live.size - stale);
    return stale + missing + deletedOf(state).size > Math.max(64, state.index.getCurrentCount() / 3);
  };

  /** Marks deleted what `rows` no longer holds and adds what is missing, from the stored vectors. */
  const patch = (c: string, state: Loaded, rows: readonly { id: number; chunkHash: string }[], wanted: ReadonlyMap<number, string>) => {
    let removed = 0;
    for (const id of [...state.live]) {
      if (!wanted.has(id)) {
        state.index.markDelete(id);
        state.live.delete(id);
        removed++;
      }
    }
    const missing = rows.filter((r) => !state.live.has(r.id));
    const vectors = repo.getVectors(embedderId, missing.map((r) => r.chunkHash));
    const needed = state.index.getCurrentCount() + missing.length;
    if (needed > state.index.getMaxElements()) state.index.resizeIndex(Math.ceil(needed * 1.25) + 16);
    let added = 0;
    let withoutVector = 0;
    for (const r of missing) {
      const v = vectors.get(r.chunkHash);
      if (!v || v.length !== dimensions) {
        withoutVector++;
        continue;
      }
      state.index.addPoint(Array.from(v), r.id);
      state.live.add(r.id);
      added++;
    }
    if (withoutVector > 0) logger?.warn({ collection: c, chunks: withoutVector }, 'chunks without a stored vector for this embedder are not in the vector index');
    if (added + removed > 0) state.saved = false;
    return { added, removed };
  };

  const emptyState = (capacity: number): Loaded => ({
    index: fresh(capacity),
    meta: { version: 1, embedderId, dimensions, generation: -1, file: '', m: params.m, efConstruction: params.efConstruction, deleted: [] },
    live: new Set(),
    saved: false,
  });

  const persistOrKeep = (c: string, state: Loaded, generation: number, persist: boolean): void => {
    if (state.saved && state.meta.generation === generation) return;
    if (!persist) {
      state.meta = { ...state.meta, generation };
      return;
    }
    try {
      save(c, state, generation);
    } catch (err) {
      // A read-only data folder still serves queries from memory.
      state.meta = { ...state.meta, generation };
      logger?.warn({ collection: c, err: (err as Error).message }, 'could not save vector index');
    }
  };

  const sync: VectorIndexes['sync'] = (c, opts = {}) => {
    const persist = opts.persist ?? true;
    const generation = opts.generation ?? repo.collectionState(c)?.generation ?? 0;
    let state = loaded.get(c) ?? null;
    if (state && state.meta.generation === generation && (state.saved || !persist)) {
      return { added: 0, removed: 0, rebuilt: false, size: state.live.size };
    }
    const rows = repo.chunksOfCollection(c);
    const wanted = new Map(rows.map((r) => [r.id, r.chunkHash] as const));
    if (state && state.meta.generation !== generation && tooFar(state, wanted)) {
      // A full re-index swapped the collection: its writer saved the new index before switching, and loading
      // that file costs far less than rebuilding here, on the query path. What is loaded is still checked
      // against the database below, like any index read from disk.
      const disk = readMeta(c);
      if (disk && disk.generation === generation && disk.file !== state.meta.file) {
        const next = tryLoad(c);
        if (next) {
          state = next;
          logger?.info({ collection: c, generation }, 'vector index switched to the one a full re-index built');
        }
      }
    }
    if (!state) state = tryLoad(c);
    let rebuilt = false;
    if (state && tooFar(state, wanted)) state = null;
    if (!state) {
      state = emptyState(rows.length + 16);
      rebuilt = true;
    }
    const { added, removed } = patch(c, state, rows, wanted);
    if (rebuilt && rows.length > 0) logger?.info({ collection: c, vectors: added }, 'vector index rebuilt from stored vectors');
    persistOrKeep(c, state, generation, persist);
    loaded.set(c, state);
    return { added, removed, rebuilt, size: state.live.size };
  };

  const removeFiles = (c: string, keep?: string): void => {
    const meta = readMeta(c);
    for (const f of [meta?.file ? path.join(dir, meta.file) : null, metaPath(c)]) {
      if (!f || (keep && f === path.join(dir, keep))) continue;
      try {
        unlinkSync(f);
      } catch {
        /* already gone */
      }
    }
  };

  const adopt: VectorIndexes['adopt'] = (from, to, generation, rows) => {
    const wanted = new Map(rows.map((r) => [r.id, r.chunkHash] as const));
    let state = loaded.get(from) ?? tryLoad(from);
    if (state && tooFar(state, wanted)) state = null;
    if (!state) state = emptyState(rows.length + 16);
    patch(to, state, rows, wanted);
    const previous = readMeta(to)?.file;
    const shadowFile = state.meta.file;
    state.saved = false;
    save(to, state, generation);
    // save() removed the shadow's index file (the state's previous file); the shadow's meta and the target's
    // old index file are left.
    for (const f of [previous && previous !== state.meta.file ? path.join(dir, previous) : null, metaPath(from), shadowFile ? path.join(dir, shadowFile) : null]) {
      if (!f || f === path.join(dir, state.meta.file)) continue;
      try {
        unlinkSync(f);
      } catch {
        /* already gone */
      }
    }
    loaded.delete(from);
    loaded.set(to, state);
  };

  return {
    sync,
    adopt,
    discard(c) {
      loaded.delete(c);
      removeFiles(c);
    },
    savedGeneration(c) {
      const meta = readMeta(c);
      return meta && meta.file && existsSync(path.join(dir, meta.file)) ? meta.generation : null;
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
        if (ids.length <= EXACT_SCAN_LIMIT) return exactSearch(state.index, query, ids, n);
        let ef = Math.max(params.efSearch, n);
        for (;;) {
          state.index.setEf(ef);
          const res = state.index.searchKnn(query, n, (label) => allowed.has(label));
          if (res.neighbors.length >= n || ef >= ids.length) {
            state.index.setEf(params.efSearch);
            return res.neighbors.length >= n ? toHits(res) : exactSearch(state.index, query, ids, n);
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
    close() {
      loaded.clear();
    },
  };
}

const EXACT_SCAN_LIMIT = 2000;

function toHits(res: { neighbors: number[]; distances: number[] }): VectorHit[] {
  const hits: VectorHit[] = [];
  for (let i = 0; i < res.neighbors.length; i++) hits.push({ chunkId: res.neighbors[i]!, score: 1 - res.distances[i]! });
  return hits;
}

function exactSearch(index: Hnsw, query: number[], ids: readonly number[], n: number): VectorHit[] {
  const scored = ids.map((id) => {
    const v = index.getPoint(id);
    let s = 0;
    for (let i = 0; i < query.length; i++) s += query[i]! * v[i]!;
    return { chunkId: id, score: s };
  });
  return scored.sort((a, b) => b.score - a.score || a.chunkId - b.chunkId).slice(0, n);
}

function deletedOf(state: Loaded): Set<number> {
  const all = state.index.getIdsList();
  return new Set(all.filter((id) => !state.live.has(id)));
}

export function fileSafe(collection: string): string {
  if (SAFE_NAME.test(collection)) return collection;
  return Buffer.from(collection).toString('hex');
}

function fsyncFile(file: string): void {
  const fd = openSync(file, 'r+');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}

function fsyncDir(dir: string): void {
  try {
    const fd = openSync(dir, 'r');
    try {
      fsyncSync(fd);
    } finally {
      closeSync(fd);
    }
  } catch {
    /* not every platform can fsync a directory */
  }
}
