// The system of record as an asynchronous interface: what a database reached over the network (PostgreSQL)
// provides. The synchronous `Store` (types.ts) stays the interface of the embedded SQLite file; a networked
// database cannot answer synchronously, so it implements this instead, and the API nodes keep their in-memory
// indexes (the lexical engine and HNSW) built from it and kept current by reading its change log.
// docs/architecture.md, "PostgreSQL back end".

import type {
  ChunkInput,
  ChunkView,
  CollectionRow,
  DocumentRecord,
  JobOwner,
  JobRecord,
  JobState,
  Lease,
  NewDocument,
  NewRating,
  Rating,
} from './types.js';

/** One entry of the change log: a chunk that appeared or went, or a collection that was made. */
export interface ChangeEntry {
  /** Its place in the log: positions only grow, and a reader that has seen one has seen every lower one. */
  position: number;
  collection: string;
  kind: 'collection-created' | 'chunk-added' | 'chunk-removed';
  documentId: string | null;
  chunkId: number | null;
  /** The collection's generation this change moved it to. */
  generation: number;
}

export interface ChangeBatch {
  /** The position a reader has reached after this batch (the last entry's, or the position asked for). */
  head: number;
  entries: ChangeEntry[];
  /** True when more entries follow: ask again from `head`. */
  more: boolean;
}

export interface ReplaceResult {
  removedChunkIds: number[];
  /** The new chunks' ids, in the order the chunks were given. */
  chunkIds: number[];
  generation: number;
  /** The document's version: 1 when first stored, one more on each replacement. */
  version: number;
}

/** A chunk as stored, with its id (the same id on every node: it is the HNSW label and the lexical row id). */
export type StoredChunk = ChunkInput & { id: number; metadata: Record<string, unknown> };

/** One document as the database holds it now, read in one snapshot: what a node copies into its local store. */
export interface DocumentCopy {
  /** The document's version (1 when first stored, one more on each replacement). */
  version: number;
  doc: NewDocument;
  /** In id order. */
  chunks: StoredChunk[];
  /** The chunks' vectors of the model asked for, by chunk hash (none for a chunk embedded with another model). */
  vectors: Map<string, Float32Array>;
}

/** Jobs with leases: a running job is held by one holder until its lease expires unrenewed. */
export interface AsyncJobStore {
  create(kind: string, collection: string | null, payload?: unknown): Promise<JobRecord>;
  get(id: string): Promise<JobRecord | null>;
  /**
   * Claims the oldest job that is queued, or running under a lease that has expired (its holder is gone), for
   * `owner` with a lease of `leaseMs`. Concurrent claimers never receive the same job. A job whose lease expired
   * after `maxAttempts` attempts is failed instead of being claimed again.
   */
  claimNext(owner: JobOwner, opts: { leaseMs: number; maxAttempts?: number; kinds?: readonly string[] }): Promise<JobRecord | null>;
  /** Extends one job's lease if `holder` still holds it; false when the lease was taken over or the job ended. */
  renew(id: string, holder: string, leaseMs: number): Promise<boolean>;
  /** The heartbeat: extends every running job `holder` holds. Returns how many. */
  renewAll(holder: string, leaseMs: number): Promise<number>;
  /** Ends a job `holder` still holds; false (and nothing written) when it no longer holds it. */
  succeed(id: string, holder: string, result: unknown): Promise<boolean>;
  fail(id: string, holder: string, error: string, result?: unknown): Promise<boolean>;
  counts(): Promise<{ state: JobState; count: number }[]>;
  /** A queued or running upload job of the collection for these bytes (its payload's content hash), oldest first. */
  pendingUpload(collection: string, contentHash: string): Promise<JobRecord | null>;
}

/** Named leases (the re-index lock): one holder at a time, taken over once its holder stops renewing it. */
export interface AsyncLeaseStore {
  /** Takes the lease for `owner` when it is free, expired or already held by `owner`; else returns the live lease in the way. */
  acquire(name: string, owner: JobOwner, ttlMs: number): Promise<{ acquired: true; lease: Lease } | { acquired: false; held: Lease }>;
  /** Extends the lease if `holder` still holds it; false when it was lost. */
  renew(name: string, holder: string, ttlMs: number): Promise<boolean>;
  release(name: string, holder: string): Promise<void>;
  get(name: string): Promise<Lease | null>;
}

/** Staff ratings of answers from the reference desk. */
export interface AsyncRatingStore {
  add(r: NewRating): Promise<Rating>;
  /** Oldest first; narrowed to one collection when given. */
  list(opts?: { collection?: string }): Promise<Rating[]>;
}

/** Collections, documents and their versions, chunks, vectors and the change log. */
export interface SystemOfRecord {
  readonly backend: 'postgres';
  /** Creates the collection if it is missing; true when it was created. */
  ensureCollection(name: string): Promise<boolean>;
  getCollection(name: string): Promise<CollectionRow | null>;
  listCollections(): Promise<CollectionRow[]>;
  getDocument(id: string): Promise<(DocumentRecord & { version: number }) | null>;
  getDocumentText(id: string): Promise<string | null>;
  /** A document of the collection with these bytes (by content hash), if the database holds one. */
  findDocumentByContent(collection: string, contentHash: string): Promise<(DocumentRecord & { version: number }) | null>;
  listDocuments(collection: string): Promise<DocumentRecord[]>;
  /** Replaces a document with its chunks and vectors, and logs the change, in one transaction. */
  replaceDocument(doc: NewDocument, chunks: ChunkInput[], vectors: Map<string, Float32Array>, modelId: string): Promise<ReplaceResult>;
  /** Removes a document and its chunks (logged); returns the removed chunk ids, none when there was no such document. */
  deleteDocument(id: string): Promise<number[]>;
  chunkViews(ids: readonly number[]): Promise<Map<number, ChunkView>>;
  chunkVectors(modelId: string, ids: readonly number[]): Promise<Map<number, Float32Array>>;
  /** Entries after `position`, oldest first, at most `limit`. */
  changesSince(position: number, limit?: number): Promise<ChangeBatch>;
  /** The last position of the change log (0 when empty). */
  changeHead(): Promise<number>;
  /** The document with its chunks and their vectors of `modelId`, read in one snapshot; null when there is none. */
  documentCopy(id: string, modelId: string): Promise<DocumentCopy | null>;
  /** Many documents as `documentCopy` reads one, all in one snapshot and a few queries; those not held are absent. */
  documentCopies(ids: readonly string[], modelId: string): Promise<Map<string, DocumentCopy>>;
  /** The identity the database was given when its schema was created: a node's snapshot records whose it is. */
  systemId(): Promise<string>;
  /**
   * Calls `onChange` whenever a change of the log commits (LISTEN/NOTIFY on a connection of its own, which
   * reconnects by itself), and once each time it (re)connects. Notifications sent while it was down are lost.
   */
  listen(handlers: { onChange: () => void; onState?: (listening: boolean, err?: Error) => void }): { readonly listening: boolean; close(): Promise<void> };
  readonly jobs: AsyncJobStore;
  readonly leases: AsyncLeaseStore;
  readonly ratings: AsyncRatingStore;
  close(): Promise<void>;
}
