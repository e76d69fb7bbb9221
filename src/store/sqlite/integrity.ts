// SQLite's and FTS5's own consistency checks, for `sourcebound check`.

import type { DatabaseIntegrity } from '../types.js';
import type { Db } from './db.js';

export function sqliteIntegrity(db: Db): DatabaseIntegrity {
  const rows = db.prepare('PRAGMA integrity_check').pluck().all() as string[];
  let fts: string | null = null;
  try {
    // Checks the index against the table's stored fields (a regular content table since migration 6).
    db.prepare("INSERT INTO chunks_fts(chunks_fts) VALUES ('integrity-check')").run();
  } catch (err) {
    fts = (err as Error).message;
  }
  return { sqlite: rows.filter((r) => r !== 'ok'), fts };
}
