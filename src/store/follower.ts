// An API node's follower: keeps the node's local store (its SQLite file, the node's snapshot) in step with the
// PostgreSQL system of record by applying the database's change log in order of position. At start it catches
// up from the position its snapshot recorded (0 for an empty one); after that a notification of each committed
// change wakes it (LISTEN/NOTIFY), and a poll every `pollMs` is the safety net for one missed while the
// listening connection was down.
//
// Applying a run of changes copies each document it names as the database holds it now (its rows, its chunks
// under the same ids, their vectors) into the local store, with the position reached, in one transaction
// (replica.ts); the vector index learns the same change in place, as it does from an embedded ingest, and the
// lexical index follows the local store's own change log. Rankings therefore come from the same code and the
// same rows as on the embedded back end. Copying the current state rather than replaying each entry makes a
// second application of the same entries (after a crash between the copy and the index save) a no-op.

import { SourceboundError } from '../errors.js';
import type { VectorIndexes } from './hnsw-types.js';
import type { LocalReplica, ReplicaWrite } from './sqlite/replica.js';
import type { ChangeEntry, DocumentCopy, SystemOfRecord } from './system-of-record.js';

/**
 * Documents read per query: a run's documents are read in slices of this many, each slice in one snapshot with
 * three queries (a catch-up from an empty copy used to make one round trip per document).
 */
const DOCUMENTS_PER_READ = 200;

export interface FollowerLogger {
  info(obj: object, msg: string): void;
  warn(obj: object, msg: string): void;
}

export interface FollowerStatus {
  /** The change-log position the local store holds every change up to. */
  position: number;
  /** The highest head the database was last seen at (the node is at the head when its position reaches it). */
  head: number;
  /** The last read of the database succeeded. */
  connected: boolean;
  /** The LISTEN connection is up (polling covers the time it is not). */
  listening: boolean;
  /** Connected, and the last pass found nothing after `position`. */
  atHead: boolean;
  lastError: string | null;
}

export interface Follower {
  /** Checks the snapshot belongs to this database, catches up once, then follows. Throws when the snapshot is someone else's. */
  start(): Promise<void>;
  /** Applies everything logged so far; resolves with the position reached. Rejects when the database cannot be read. */
  catchUp(): Promise<number>;
  status(): FollowerStatus;
  /** Resolves once the local store holds every change up to `position` (or the follower closes). */
  reached(position: number): Promise<void>;
  close(): Promise<void>;
}

export interface FollowerDeps {
  sor: SystemOfRecord;
  replica: LocalReplica;
  indexes: VectorIndexes;
  /** The node's embedder: vectors of its model are copied, and collections are bound to it. */
  embedder: { id: string; dimensions: number };
  logger: FollowerLogger;
  /** Called after each applied run of changes (the in-memory lexical index refreshes). */
  onApplied?: (position: number) => void;
  /**
   * Brings these collections' index files in step with the local store somewhere other than this thread (the
   * index thread of `serve`). Used for a collection whose in-place update gave up (a catch-up moved it by more
   * than one change): checking it against every stored chunk rebuilds its graph, which on this thread would
   * stop the node answering anything, /health included, for as long as that takes (7.7 s at 20,000 chunks of
   * 384 dimensions, 80 s at 100,000). Without it, that check runs here.
   */
  syncElsewhere?: (collections: string[]) => Promise<void>;
  pollMs?: number;
  /** Log entries read per run (each run is one local transaction). */
  batchSize?: number;
}

/** The documents and collections a run of entries names, each once, in the order they first appear. */
function touched(entries: readonly ChangeEntry[]): { collections: string[]; documents: string[] } {
  const collections = new Set<string>();
  const documents = new Set<string>();
  for (const e of entries) {
    if (e.kind === 'collection-created') collections.add(e.collection);
    else if (e.documentId !== null) documents.add(e.documentId);
  }
  return { collections: [...collections], documents: [...documents] };
}

const sameIds = (a: readonly number[], b: readonly number[]): boolean => a.length === b.length && a.every((x, i) => x === b[i]);

export function createFollower(deps: FollowerDeps): Follower {
  const { sor, replica, indexes, embedder, logger } = deps;
  const pollMs = deps.pollMs ?? 1000;
  const batchSize = deps.batchSize ?? 2000;
  let systemId = '';
  let position = replica.followed()?.position ?? 0;
  let head = position;
  let connected = false;
  let atHead = false;
  let lastError: string | null = null;
  let closed = false;
  let running: Promise<number> | null = null;
  let again = false;
  let timer: NodeJS.Timeout | undefined;
  let listener: ReturnType<SystemOfRecord['listen']> | undefined;
  const waiters: { position: number; resolve: () => void }[] = [];
  /** Collections whose vector index has changed since it was last saved. */
  const unsaved = new Set<string>();
  /** Of those, the ones whose index the in-place update gave up on this pass. */
  const behind = new Set<string>();

  const wake = (): void => {
    for (let i = waiters.length - 1; i >= 0; i--) {
      if (closed || waiters[i]!.position <= position) {
        waiters[i]!.resolve();
        waiters.splice(i, 1);
      }
    }
  };

  /** One run of at most `batchSize` entries: read, copy, write, apply to the vector index. Returns whether more follow. */
  const applyRun = async (): Promise<boolean> => {
    const batch = await sor.changesSince(position, batchSize);
    if (batch.entries.length === 0) return false;
    const names = touched(batch.entries);
    const writes: ReplicaWrite[] = names.collections.map((name) => ({ kind: 'collection' as const, name }));
    // Read in bulk: each slice is one snapshot, so a document's rows are consistent with each other (documents of
    // different slices may be from different moments; the log entries after `batch.head` cover what changed since).
    const copies = new Map<string, DocumentCopy>();
    for (let i = 0; i < names.documents.length; i += DOCUMENTS_PER_READ) {
      for (const [id, copy] of await sor.documentCopies(names.documents.slice(i, i + DOCUMENTS_PER_READ), embedder.id)) copies.set(id, copy);
    }
    names.documents.forEach((id) => {
      const copy = copies.get(id);
      const local = replica.copied(id);
      if (!copy) {
        writes.push({ kind: 'delete', id });
      } else if (!local || local.version !== copy.version || !sameIds(local.chunkIds, copy.chunks.map((c) => c.id))) {
        writes.push({ kind: 'put', copy });
      }
    });
    const changes = replica.apply({ systemId, position: batch.head }, writes, embedder.id, embedder);
    const vectorsOf = new Map<string, Float32Array>();
    for (const w of writes) if (w.kind === 'put') for (const [h, v] of w.copy.vectors) vectorsOf.set(h, v);
    const collections = new Set<string>();
    for (const ch of changes) {
      collections.add(ch.collection);
      const added = ch.added.flatMap((a) => {
        const vector = vectorsOf.get(a.chunkHash);
        return vector ? [{ id: a.id, vector }] : [];
      });
      if (!indexes.apply(ch.collection, { generation: ch.generation, removed: ch.removed, added })) behind.add(ch.collection);
    }
    for (const c of collections) unsaved.add(c);
    position = batch.head;
    head = Math.max(head, position);
    deps.onApplied?.(position);
    wake();
    return batch.more;
  };

  const pass = async (): Promise<number> => {
    try {
      const seen = await sor.changeHead();
      head = Math.max(head, seen);
      try {
        while (!closed && (await applyRun()));
      } finally {
        // Saved once a pass, with the generation it holds: a restart loads the file instead of building the graph
        // again. (A crash before the save leaves the file behind the store, which the next sync patches.) An index
        // the in-place update gave up on is brought in step elsewhere first; this thread then only reads its file.
        const far = [...behind].filter((c) => unsaved.has(c));
        behind.clear();
        if (far.length > 0 && deps.syncElsewhere) {
          await deps.syncElsewhere(far).catch((err: Error) => logger.warn({ err: err.message, collections: far }, 'the index thread failed; bringing the vector indexes in step on this thread'));
          // The saved files read off this thread too; the sync below then finds them in memory.
          for (const c of far) await indexes.preload?.(c);
        }
        for (const c of unsaved) indexes.sync(c);
        unsaved.clear();
      }
      connected = true;
      lastError = null;
      atHead = position >= seen;
      return position;
    } catch (err) {
      if (connected || lastError === null) logger.warn({ err, position }, 'following the change log failed; retrying');
      connected = false;
      atHead = false;
      lastError = (err as Error).message;
      throw err;
    }
  };

  const catchUp = (): Promise<number> => {
    if (running) {
      again = true;
      return running;
    }
    running = pass().finally(() => {
      running = null;
      if (again && !closed) {
        again = false;
        void catchUp().catch(() => {});
      }
    });
    return running;
  };

  return {
    async start() {
      systemId = await sor.systemId();
      const followed = replica.followed();
      if (followed && followed.systemId !== systemId) {
        throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [
          `the local store in the data folder follows another database (${followed.systemId}, this one is ${systemId}); start the node on an empty data folder`,
        ]);
      }
      if (!followed && replica.documentCount() > 0) {
        throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [
          'the data folder holds an embedded store with documents, not a copy of this database; start the node on an empty data folder',
        ]);
      }
      // A database restored from a backup keeps its identity but may be behind what this copy has applied: the
      // copy would hold changes the database no longer has.
      if (followed && followed.position > (await sor.changeHead())) {
        throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [
          `the local store has applied the change log up to ${followed.position}, beyond the database's head (restored from a backup?); start the node on an empty data folder`,
        ]);
      }
      const started = performance.now();
      await catchUp();
      logger.info({ position, ms: Math.round(performance.now() - started) }, 'reached the head of the change log');
      listener = sor.listen({
        onChange: () => void catchUp().catch(() => {}),
        onState: (up, err) => (up ? logger.info({}, 'listening for changes') : logger.warn({ err }, 'change notifications lost; polling until they return')),
      });
      timer = setInterval(() => void catchUp().catch(() => {}), pollMs);
      timer.unref();
    },
    catchUp,
    status() {
      return { position, head, connected, listening: listener?.listening ?? false, atHead, lastError };
    },
    reached(p) {
      if (closed || position >= p) return Promise.resolve();
      return new Promise((resolve) => waiters.push({ position: p, resolve }));
    },
    async close() {
      closed = true;
      if (timer) clearInterval(timer);
      await listener?.close();
      await running?.catch(() => {});
      wake();
    },
  };
}
