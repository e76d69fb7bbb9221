// The vector index's contract, shared by the index (src/store/hnsw-index.ts) and its helpers.

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

export interface VectorIndexLogger {
  info(obj: object, msg: string): void;
  warn(obj: object, msg: string): void;
}

/** One write's effect on a collection's vectors, as the writer knows it from the write itself. */
export interface VectorChange {
  /** The collection's generation the write moved it to. */
  generation: number;
  removed: readonly number[];
  /**
   * The points added: an array, or for a large document its vectors read from the store a batch at a time (so
   * the writer never holds all of them at once; `count` sizes the graph before the first is read).
   */
  added: readonly VectorPoint[] | VectorBatches;
}

export interface VectorPoint {
  id: number;
  vector: Float32Array;
}

export interface VectorBatches {
  readonly count: number;
  batches(): Iterable<readonly VectorPoint[]>;
}

export interface SyncResult {
  added: number;
  removed: number;
  rebuilt: boolean;
  size: number;
  /** The index was replaced by the file another writer saved. */
  loaded?: boolean;
  /** A reader is reading a later file off the thread; queries use the index it has until then (see `settled`). */
  loading?: boolean;
  /** Tombstones were dropped by building the graph again from its live points. */
  compacted?: boolean;
}

export interface VectorIndexes {
  /**
   * Writers (`persist`, the default: ingest, re-index, start-up) bring the collection's index in step with the
   * database, checking it against every stored chunk when it was not kept in step by `apply`, save it with the
   * generation it holds, and drop tombstones past a quarter of the graph by building it again, after saving.
   * Readers (`persist: false`, the query path) never patch, rebuild or write: when the database has moved on
   * and a writer has saved a later generation, they read that file off the thread (hnswlib's asynchronous read)
   * and answer from the index they have until it is in memory. Only a reader with no index at all loads or
   * builds one on the spot.
   * `generation`: the collection's generation when the caller has just read it (saves a lookup per query).
   */
  sync(collection: string, opts?: { persist?: boolean; generation?: number }): SyncResult;
  /**
   * A writer's change applied in place (new points added, removed ones marked deleted), when the index holds
   * exactly the generation before it; memory only, saved by the writer's next `sync`. Returns false when the
   * index was not at that generation: the next `sync` then checks it against the database.
   */
  apply(collection: string, change: VectorChange): boolean;
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
  /** Tombstones (points marked deleted) in the collection's in-memory graph. */
  deletedCount(collection: string): number;
  /**
   * Resolves when no read of a later file and no fill of the filter's vector cache is under way for the
   * collection (for every collection without one).
   */
  settled(collection?: string): Promise<void>;
  /** Vectors held in memory for the exact scan of selective filters (filled after a collection's first filter). */
  cachedVectors(collection: string): number;
  /**
   * The stored vectors of these chunks (of this index's embedder), in ascending id order, through the collection's
   * vector cache: held ones are copied from it, the others read from the store and kept there when the index holds
   * them (within `limits.vectorCacheMb`). Absent when not offered (callers read the store).
   */
  vectors?(collection: string, ids: readonly number[]): Map<number, Float32Array>;
  /**
   * Reads the collection's saved file off the thread (hnswlib's asynchronous read) when memory holds no index of
   * it or an older one, so that the next `sync` finds it in memory instead of reading the file on the spot (2 s at
   * 100,000 chunks of 384 dimensions, the request thread stalled meanwhile). Absent when not offered.
   */
  preload?(collection: string): Promise<void>;
  /** Forgets in-memory state, e.g. before closing. */
  close(): void;
}
