// The SQLite implementation of the store: one database file (WAL mode) holds collections, documents, chunks,
// their FTS5 rows and vectors, jobs and ratings (docs/architecture.md, "Storage").

import type { DatabaseIntegrity, JobStore, LeaseStore, RatingStore, Repository, Store } from '../types.js';
import { sqliteChunks, sqliteFtsSearch } from './chunks.js';
import { sqliteCollections, sqliteDocuments } from './corpus.js';
import { openDatabase, type Db } from './db.js';
import { sqliteIntegrity } from './integrity.js';
import { sqliteJobs } from './jobs.js';
import { sqliteLeases } from './leases.js';
import { sqliteLexical } from './lexical.js';
import { sqliteRatings } from './ratings.js';

// The corpus methods are built per part (corpus.ts, chunks.ts, lexical.ts) and installed on the instance.
export interface SqliteStore extends Repository {}

export class SqliteStore implements Store {
  readonly jobs: JobStore;
  readonly leases: LeaseStore;
  readonly ratings: RatingStore;

  /** Takes over an open connection (see openDatabase); `close()` closes it. `clock` dates jobs and leases. */
  constructor(
    readonly db: Db,
    clock: () => Date = () => new Date(),
  ) {
    const collections = sqliteCollections(db);
    const corpus: Repository = {
      ...collections,
      ...sqliteDocuments(db, (c) => collections.bumpGeneration(c)),
      ...sqliteChunks(db),
      ...sqliteLexical(db),
      searchFts: sqliteFtsSearch(db, (c) => collections.collectionState(c) !== null),
    };
    Object.assign(this, corpus);
    this.jobs = sqliteJobs(db, clock);
    this.leases = sqliteLeases(db, clock);
    this.ratings = sqliteRatings(db);
  }

  integrity(): DatabaseIntegrity {
    return sqliteIntegrity(this.db);
  }

  async backup(file: string): Promise<void> {
    // SQLite's online backup API: a consistent snapshot even while another connection writes (WAL mode).
    await this.db.backup(file);
  }

  close(): void {
    if (this.db.open) this.db.close();
  }
}

/** Opens (creating and migrating if needed) the store in `file`, or in memory for ':memory:'. */
export function openStore(file: string, opts: { readonly?: boolean; clock?: () => Date; mmap?: boolean } = {}): SqliteStore {
  return new SqliteStore(openDatabase(file, opts), opts.clock);
}

