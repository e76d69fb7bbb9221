import { mkdirSync } from 'node:fs';
import path from 'node:path';
import Database from 'better-sqlite3';
import { MIGRATIONS, runMigration } from './migrations.js';

export type Db = Database.Database;

/** Largest part of the database file read through a memory map. */
const MMAP_BYTES = 1024 * 1024 * 1024;

/**
 * Opens (creating if needed) the SQLite store in WAL mode and brings its schema up to date. `mmap` false reads
 * pages with read() instead of the memory map: for connections that read in sequential batches (the job thread,
 * the start-up index thread, the lexical change thread), whose mapped pages would only add to the process's
 * resident size.
 */
export function openDatabase(file: string, opts: { readonly?: boolean; mmap?: boolean } = {}): Db {
  if (file !== ':memory:') mkdirSync(path.dirname(file), { recursive: true });
  const db = new Database(file, { readonly: opts.readonly ?? false });
  // WAL lets the server read while a CLI ingest writes; busy_timeout makes the second writer wait, not fail.
  if (!opts.readonly) db.pragma('journal_mode = WAL');
  db.pragma('busy_timeout = 10000');
  db.pragma('foreign_keys = ON');
  db.pragma('synchronous = NORMAL');
  // Reads through a memory map instead of a read() per page (sqlite.org/mmap.html): the exact scan of a selective
  // filter reads a thousand scattered vectors, 3x faster measured this way at 100k chunks (docs/benchmarks.md).
  // The map is address space, not memory: pages are the file's own, shared with the OS cache; but every page
  // touched through it counts in the process's resident size (VmRSS, as RssFile): reading a large document's
  // vectors back through it added about as much as the vectors themselves (docs/benchmarks.md, "Bounded memory").
  if (opts.mmap ?? true) db.pragma(`mmap_size = ${MMAP_BYTES}`);
  if (!opts.readonly) migrate(db);
  return db;
}

export function schemaVersion(db: Db): number {
  return db.pragma('user_version', { simple: true }) as number;
}

export function migrate(db: Db): number {
  const current = schemaVersion(db);
  for (let v = current; v < MIGRATIONS.length; v++) {
    const step = MIGRATIONS[v]!;
    db.transaction(() => {
      runMigration(db, step);
      db.pragma(`user_version = ${v + 1}`);
    }).immediate();
  }
  return schemaVersion(db);
}
