// The PostgreSQL system of record: a pool, migrated at open under the migration lock, and its parts.

import type { SystemOfRecord } from '../system-of-record.js';
import { connectPool, type PgConnectOptions, type PgPool } from './connect.js';
import { pgCorpus } from './corpus.js';
import { pgJobs } from './jobs.js';
import { pgLeases } from './leases.js';
import { pgRatings } from './ratings.js';
import { migratePg, type MigrationReport } from './migrations.js';
import { readDocumentCopies, readDocumentCopy, readSystemId } from './copy.js';
import { listenForChanges } from './listen.js';

export interface PgSystemOfRecord extends SystemOfRecord {
  /** What the migration at open did. */
  readonly migration: MigrationReport;
  /** The pool, for the back end's own tests and tools. */
  readonly pool: PgPool;
}

/** Connects to `url`, brings its schema to the latest version, and returns the system of record over it. */
export async function openPgSystemOfRecord(url: string, opts: PgConnectOptions = {}): Promise<PgSystemOfRecord> {
  const pool = await connectPool(url, opts);
  let migration: MigrationReport;
  try {
    migration = await migratePg(pool);
  } catch (err) {
    await pool.end().catch(() => {});
    throw err;
  }
  let closed: Promise<void> | undefined;
  return {
    backend: 'postgres',
    migration,
    pool,
    ...pgCorpus(pool),
    jobs: pgJobs(pool),
    leases: pgLeases(pool),
    ratings: pgRatings(pool),
    documentCopy: (id, modelId) => readDocumentCopy(pool, id, modelId),
    documentCopies: (ids, modelId) => readDocumentCopies(pool, ids, modelId),
    systemId: () => readSystemId(pool),
    listen: (handlers) => listenForChanges(url, handlers, { connectTimeoutMs: opts.connectTimeoutMs ?? 5000 }),
    close: () => (closed ??= pool.end()),
  };
}
