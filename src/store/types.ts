// The store: the one interface through which the rest of the service reads and writes what it keeps.
// Only src/store/ talks to a database; everything else names the part of this interface it needs
// (ingest the corpus, retrieval the chunks, vectors and postings, the queue the jobs and their leases).
// sqlite/store.ts is the implementation the service runs; a second back end implements `Store` beside it.

import type { ChunkDraft, ChunkPlace, Citation, DocumentFilter, PageBreak, PlacedChunkText } from '../types.js';

/**
 * A full re-index builds into a shadow collection of this name and swaps it in at the end. Collection names
 * start with a letter or digit (src/api/schemas.ts), so a shadow never clashes with a real collection.
 */
export const SHADOW_PREFIX = '~rebuild:';
export const shadowCollectionName = (collection: string): string => `${SHADOW_PREFIX}${collection}`;
export const isShadowCollection = (collection: string): boolean => collection.startsWith(SHADOW_PREFIX);

// ---- records ----

export interface CollectionState {
  name: string;
  embedderId: string | null;
  dimensions: number | null;
  /** Bumped on every change to the collection's chunks: the change log readers compare against. */
  generation: number;
}

export interface CollectionRow extends CollectionState {
  documents: number;
  chunks: number;
}

/** What a document is, however it was stored. */
interface DocumentFields {
  id: string;
  collection: string;
  source: string;
  root: string | null;
  title: string;
  format: string;
  contentHash: string;
  byteSize: number;
  pageCount: number | null;
  effectiveDate: string | null;
  metadata: Record<string, string>;
  /** The settings its chunks were made with (embedder, chunker, pipeline version). */
  settingsKey: string;
}

export interface DocumentRecord extends DocumentFields {
  createdAt: string;
  updatedAt: string;
}

export interface NewDocument extends DocumentFields {
  /** The normalised text the chunks' offsets point into. */
  text: string;
}

export interface DocumentKey {
  id: string;
  source: string;
  root: string | null;
  contentHash: string;
  settingsKey: string;
  updatedAt: string;
}

/** A chunk as the pipeline hands it over: the chunker's draft (page breaks optional) and the hash of its embedded text. */
export interface ChunkInput extends Omit<ChunkDraft, 'pageBreaks'> {
  /** Pages that begin inside the chunk, in document offsets; left out, none are recorded. */
  pageBreaks?: PageBreak[];
  chunkHash: string;
}

export interface ChunkRef {
  id: number;
  chunkHash: string;
}

/** A chunk joined with its document: what retrieval hands on. */
export interface ChunkView extends PlacedChunkText {
  chunkId: number;
  documentId: string;
  source: string;
  title: string;
  effectiveDate: string | null;
  /** The document's stated version or issue ("Issue 4", "v2.1"), when it states one. */
  version?: string | null;
  chunkHash: string;
}

/** Where a chunk lies in its document, for placing a quote in its surroundings. */
export type ChunkSpan = ChunkPlace;

export interface FtsRow {
  chunkId: number;
  score: number;
}

/** Column weights of the lexical index's three fields. */
export interface FtsWeights {
  title: number;
  heading: number;
  body: number;
}

export type LexicalField = keyof FtsWeights;

// ---- the parts of the interface ----

/** Collections, the folders they were ingested from, and the change log (each collection's generation). */
export interface CollectionStore {
  ensureCollection(name: string): void;
  getCollection(name: string): CollectionRow | null;
  /** The collection row without its counts: one primary-key lookup, for the query path. */
  collectionState(name: string): CollectionState | null;
  /** Every collection but the shadows of full re-indexes in progress. */
  listCollections(): CollectionRow[];
  setCollectionEmbedder(name: string, embedderId: string, dimensions: number): void;
  bumpGeneration(name: string): number;
  /** Sets what a full re-index switched a collection to; the generation is set, not bumped. */
  setCollectionState(name: string, state: { embedderId: string; dimensions: number; generation: number }): void;
  /** Removes an (empty) collection row, e.g. a shadow collection after its swap. */
  dropCollection(name: string): void;
  /** Every collection's name and generation in one string: it changes whenever any collection changes. */
  changeSignature(): string;
  addSourceRoot(collection: string, root: string): void;
  listSourceRoots(collection?: string): { collection: string; root: string }[];
}

/** Documents, written with their chunks, lexical rows and vectors in one transaction. */
export interface DocumentStore {
  getDocumentBySource(collection: string, source: string): DocumentRecord | null;
  getDocument(id: string): DocumentRecord | null;
  getDocumentText(id: string): string | null;
  /** A document of the collection with exactly these bytes, if there is one. */
  findDocumentByContent(collection: string, contentHash: string): { id: string; source: string } | null;
  listDocuments(collection: string): DocumentRecord[];
  countDocuments(collection?: string): number;
  /** Each document of a collection without its text: what change detection needs. */
  documentKeys(collection: string): DocumentKey[];
  /** Replaces a document and all of its chunks in one transaction. */
  replaceDocument(doc: NewDocument, chunks: ChunkInput[], vectors: Map<string, Float32Array>, modelId: string): {
    removedChunkIds: number[];
    chunkIds: number[];
    /** The collection's generation this change moved it to. */
    generation: number;
  };
  /** Removes a document and its chunks; returns the removed chunk ids. */
  deleteDocument(id: string): number[];
  /**
   * Moves a document to a new id, collection and source, keeping its chunks (and so their vectors and lexical
   * rows): a renamed file, or a document built in a shadow collection. Returns the number of chunks moved.
   */
  moveDocument(fromId: string, to: { id: string; collection: string; source: string; root: string | null }): number;
  /** Runs `fn` as one write transaction. */
  transaction<T>(fn: () => T): T;
}

export interface ChunkStore {
  chunksOfCollection(collection: string): ChunkRef[];
  chunksOfDocuments(ids: readonly string[]): ChunkRef[];
  countChunks(documentId: string): number;
  chunkViews(ids: readonly number[]): Map<number, ChunkView>;
  /** Chunk texts alone (no document join), e.g. for query expansion. */
  chunkTexts(ids: readonly number[]): Map<number, string>;
  /** The document's chunks that overlap [start, end), in document order. */
  chunkSpans(documentId: string, start: number, end: number): ChunkSpan[];
  /** Chunk ids of the collection whose document passes the filter. */
  chunkIdsMatching(collection: string, filter: DocumentFilter): Set<number>;
}

export interface VectorStore {
  /** Stored vectors by chunk hash. */
  getVectors(modelId: string, hashes: readonly string[]): Map<string, Float32Array>;
  /** Stored vectors of chunks by chunk id, in one statement. */
  chunkVectors(modelId: string, ids: readonly number[]): Map<number, Float32Array>;
  /** Which of `hashes` have a stored vector, without reading the vectors. */
  vectorHashes(modelId: string, hashes: readonly string[]): Set<string>;
  /**
   * Stores vectors by chunk hash in one transaction; a hash already stored keeps its vector. Vectors are a cache
   * keyed by the chunk text's hash (never deleted with a chunk), so storing them before their chunks is safe: a
   * document that then fails leaves only cache rows a later chunk with the same text reuses.
   */
  putVectors(modelId: string, vectors: ReadonlyMap<string, Float32Array>): void;
}

/**
 * One consistent read of the lexical index: BM25's collection statistics and the postings, all from the same
 * moment. Iterate each part once, then `release()`.
 */
export interface LexicalSnapshot {
  /** The change signature (CollectionStore.changeSignature) at the moment of the read. */
  readonly signature: string;
  /** The lexical change log's last position at the moment of the read (LexicalStore.lexicalHead). */
  readonly head: number;
  /** Rows counted in the index's statistics (N). */
  readonly rows: number;
  /** Tokens over every row and field of the statistics. */
  readonly tokens: number;
  /** How many rows have a recorded length. */
  readonly lengthCount: number;
  /** Each row's length in tokens over all fields, by ascending row id (= chunk id). */
  rowLengths(): Iterable<[rowId: number, length: number]>;
  /** The collection of every chunk, in no particular order. */
  rowCollections(): Iterable<[rowId: number, collection: string]>;
  /** Every collection's name, including those without chunks. */
  collectionNames(): string[];
  /** Every occurrence of every term: grouped by term, within a term by row id. */
  postings(): Iterable<[term: string, rowId: number, field: LexicalField]>;
  release(): void;
}

/** One row of the lexical index as it is now, after a change logged for it. */
export interface LexicalRowChange {
  rowId: number;
  /** The row's fields and length now; null when the index holds no such row (deleted, or not yet swapped in). */
  row: {
    /** Its chunk's collection; null for a row whose chunk is gone (it still counts in the statistics). */
    collection: string | null;
    /** Tokens over all fields, as the index records it. */
    length: number;
    /** Every occurrence of every term in the row, in no particular order. */
    postings: [term: string, field: LexicalField][];
  } | null;
}

/**
 * The changes to the lexical index since a position of its change log, read in one transaction: the rows
 * changed since, each as it is now, and the statistics now. Iterate `changes()` once, then `release()`.
 */
export interface LexicalDelta {
  /** The log position this delta brings a reader to. */
  readonly head: number;
  /** False when the log no longer holds every change since the position asked for (pruned): read a snapshot. */
  readonly complete: boolean;
  /** Rows counted in the index's statistics (N) and tokens over them, now. */
  readonly rows: number;
  readonly tokens: number;
  /** How many distinct rows changed. */
  readonly count: number;
  changes(): Iterable<LexicalRowChange>;
  release(): void;
}

/** A delta read in full (by the lexical change thread, src/lexical-worker.ts) and handed over as plain data. */
export interface LexicalChangeSet {
  readonly head: number;
  readonly complete: boolean;
  readonly rows: number;
  readonly tokens: number;
  readonly count: number;
  readonly changes: readonly LexicalRowChange[];
}

/** Query words split into the index's own terms (stemmed and folded as the index does). */
export interface QueryTokenizer {
  (words: readonly string[]): string[][];
  close(): void;
}

/** BM25 over the chunks: the index's own ranking, and its statistics and postings for an in-memory copy. */
export interface LexicalStore {
  /** The top chunks of a collection for a lexical query expression (query-text.ts), larger score better. */
  searchFts(collection: string, match: string, limit: number, weights: FtsWeights, filter?: DocumentFilter): FtsRow[];
  /**
   * Opens a snapshot. `concurrent`: read on a connection of its own, so that the caller may read it in slices
   * while other work goes on (only when `concurrentReads`).
   */
  lexicalSnapshot(opts?: { concurrent?: boolean }): LexicalSnapshot;
  /** The lexical change log's last position: it moves whenever a row of the lexical index may have changed. */
  lexicalHead(): number;
  /** The rows changed after log position `since` (same `concurrent` as for snapshots). */
  lexicalChanges(since: number, opts?: { concurrent?: boolean }): LexicalDelta;
  /** Whether a snapshot can be read beside ongoing writes (false for an in-memory database). */
  readonly concurrentReads: boolean;
  queryTokenizer(): QueryTokenizer;
}

/** The corpus: what ingest writes and retrieval reads. */
export interface Repository extends CollectionStore, DocumentStore, ChunkStore, VectorStore, LexicalStore {}

export type JobState = 'queued' | 'running' | 'succeeded' | 'failed';

/**
 * Who holds a running job or a named lease: a holder id made afresh by each process (and each of its threads),
 * with the process id and host for people to read. A holder keeps what it holds by renewing the lease (its
 * heartbeat); a lease not renewed before it expires counts as abandoned, whatever became of the process or its id.
 */
export interface JobOwner {
  pid: number;
  host: string;
  holder: string;
}

/** A named lease in the database (the re-index lock): held by one holder until it expires or is released. */
export interface Lease {
  name: string;
  owner: JobOwner;
  acquiredAt: string;
  heartbeatAt: string;
  expiresAt: string;
}

/** Named leases: one holder at a time, taken over once its holder stops renewing it. */
export interface LeaseStore {
  /**
   * Takes the lease for `owner` until now + `ttlMs` when it is free, expired, held by `owner` already, or held
   * by an owner `isGone` knows has ended (a process of this host); otherwise returns the live lease that is in
   * the way. Atomic across processes.
   */
  acquire(
    name: string,
    owner: JobOwner,
    ttlMs: number,
    isGone?: (holder: JobOwner) => boolean,
  ): { acquired: true; lease: Lease } | { acquired: false; held: Lease };
  /** Extends the lease to now + `ttlMs` if `holder` still holds it; false when it was lost (expired and taken). */
  renew(name: string, holder: string, ttlMs: number): boolean;
  /** Gives the lease up if `holder` holds it. */
  release(name: string, holder: string): void;
  get(name: string): Lease | null;
}

export interface JobRecord {
  id: string;
  kind: string;
  collection: string | null;
  state: JobState;
  attempts: number;
  payload: unknown;
  result: unknown;
  error: string | null;
  createdAt: string;
  startedAt: string | null;
  finishedAt: string | null;
  /** Who runs it while it is running; null for rows written before owners were recorded. */
  owner: JobOwner | null;
}

/** Jobs and their leases: a running job is held by the process that started or claimed it. */
export interface JobStore {
  create(kind: string, collection: string | null, payload?: unknown): JobRecord;
  /** Marks a job running, held by `owner` under a lease of `leaseMs` from now. */
  start(id: string, owner: JobOwner, leaseMs: number): void;
  succeed(id: string, result: unknown): void;
  fail(id: string, error: string, result?: unknown): void;
  get(id: string): JobRecord | null;
  /** Jobs by state; only those of these collections when given (jobs of no single collection are then left out). */
  counts(collections?: readonly string[]): { state: JobState; count: number }[];
  /** The queued or running upload job of this collection whose payload carries this content hash, if any. */
  activeUpload(collection: string, contentHash: string): JobRecord | null;
  /** Queue jobs (payload `via: "api"`) queued or running. */
  pendingQueued(): number;
  /** Claims the oldest queued job for `owner` (a lease of `leaseMs`) atomically, so two runners never take the same one. */
  claimNext(owner: JobOwner, leaseMs: number): JobRecord | null;
  /** The heartbeat: extends the leases of the running jobs `holder` holds to now + `leaseMs`. Returns how many. */
  renewLeases(holder: string, leaseMs: number): number;
  /**
   * Queue jobs that are abandoned (their lease expired, or `isGone` says their owner is gone) go back to the
   * queue, or fail once they have had `maxAttempts`. Returns how many were requeued.
   */
  requeueAbandoned(isGone: (owner: JobOwner | null) => boolean, maxAttempts: number): number;
  /** Other running jobs (a CLI ingest, a seed) that are abandoned (as above) fail with `reason(owner)`. */
  failAbandoned(isGone: (owner: JobOwner | null) => boolean, reason: (owner: JobOwner | null) => string): number;
}

/** A cited source as the rating keeps it. */
export type RatedSource = Pick<Citation, 'n' | 'documentId' | 'source' | 'title' | 'page' | 'section' | 'quote'>;

export interface NewRating {
  collection: string;
  keyId: string | null;
  question: string;
  /** The standalone question the service answered, when it rewrote a follow-up. */
  answeredQuestion: string | null;
  history: { role: 'user' | 'assistant'; content: string }[];
  answer: string;
  abstained: boolean;
  sources: RatedSource[];
  helpful: boolean;
  comment: string | null;
}

export interface Rating extends NewRating {
  id: number;
  createdAt: string;
}

/** Staff ratings of answers from the reference desk. */
export interface RatingStore {
  add(r: NewRating): Rating;
  /** Oldest first; narrowed to one collection when given. */
  list(opts?: { collection?: string }): Rating[];
}

/** The database's own consistency checks (`sourcebound check`). */
export interface DatabaseIntegrity {
  /** What SQLite's `PRAGMA integrity_check` reported other than "ok" (each line a problem). */
  sqlite: string[];
  /** FTS5's 'integrity-check' command on the full-text index: null when it passed, else its error. */
  fts: string | null;
}

/** Everything the service keeps. */
export interface Store extends Repository {
  /** Runs the database's own consistency checks (reads everything: slow on a large store). */
  integrity(): DatabaseIntegrity;
  readonly jobs: JobStore;
  readonly leases: LeaseStore;
  readonly ratings: RatingStore;
  /** Writes a consistent copy of the whole store to `file` (safe while others write). */
  backup(file: string): Promise<void>;
  close(): void;
}
