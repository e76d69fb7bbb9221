import { closeSync, existsSync, fsyncSync, mkdirSync, openSync, readFileSync, renameSync, unlinkSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import hnswlib from 'hnswlib-node';
import type { Repository } from './repository.js';

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
}

export interface VectorIndexLogger {
  info(obj: object, msg: string): void;
  warn(obj: object, msg: string): void;
}

export interface VectorIndexes {
  /** Brings the collection's index in step with the database (loading, patching or rebuilding it). */
  sync(collection: string): { added: number; removed: number; rebuilt: boolean; size: number };
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
  repo: Repository;
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
    const tmp = `${full}.tmp-${process.pid}`;
    state.index.writeIndexSync(tmp);
    fsyncFile(tmp);
    renameSync(tmp, full);
    const old = state.meta.file;
    state.meta = { ...state.meta, generation, file, deleted: [...deletedOf(state)] };
    const metaTmp = `${metaPath(c)}.tmp-${process.pid}`;
    writeFileSync(metaTmp, JSON.stringify(state.meta));
    fsyncFile(metaTmp);
    renameSync(metaTmp, metaPath(c));
    fsyncDir(dir);
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
      return { index, meta, live };
    } catch (err) {
      logger?.warn({ collection: c, err: (err as Error).message }, 'vector index file unreadable; rebuilding');
      return null;
    }
  };

  const sync: VectorIndexes['sync'] = (c) => {
    const col = repo.getCollection(c);
    const generation = col?.generation ?? 0;
    let state = loaded.get(c) ?? null;
    if (state && state.meta.generation === generation) return { added: 0, removed: 0, rebuilt: false, size: state.live.size };
    if (!state) state = tryLoad(c);
    const rows = repo.chunksOfCollection(c);
    const wanted = new Map(rows.map((r) => [r.id, r.chunkHash] as const));
    let rebuilt = false;
    if (state) {
      const stale = [...state.live].filter((id) => !wanted.has(id)).length;
      // Many tombstones slow search and waste memory: start over past a third of the graph.
      if (stale + deletedOf(state).size > Math.max(64, state.index.getCurrentCount() / 3)) state = null;
    }
    if (!state) {
      state = {
        index: fresh(rows.length + 16),
        meta: { version: 1, embedderId, dimensions, generation: -1, file: '', m: params.m, efConstruction: params.efConstruction, deleted: [] },
        live: new Set(),
      };
      rebuilt = true;
    }
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
    if (rebuilt && rows.length > 0) logger?.info({ collection: c, vectors: added }, 'vector index rebuilt from stored vectors');
    try {
      save(c, state, generation);
    } catch (err) {
      // A read-only data folder still serves queries from memory.
      state.meta = { ...state.meta, generation };
      logger?.warn({ collection: c, err: (err as Error).message }, 'could not save vector index');
    }
    loaded.set(c, state);
    return { added, removed, rebuilt, size: state.live.size };
  };

  return {
    sync,
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

function fileSafe(collection: string): string {
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
