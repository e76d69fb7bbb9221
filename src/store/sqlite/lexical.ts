// The lexical index's statistics and postings, read from FTS5's own index so that an in-memory copy ranks
// exactly as FTS5's bm25() does (src/retrieve/lexical-memory.ts says how they are used):
//   - N and the total token count from the table's averages record, as xRowCount and xColumnTotalSize(-1)
//     return them (a regular content table since migration 6, whose deletes take a row out of that record;
//     the contentless table before it kept counting deleted rows);
//   - |d| from the docsize table (xColumnSize(-1): tokens over all columns of the row);
//   - the postings through an fts5vocab table of type "instance" (term, row, column, offset), which lists the
//     same live rows FTS5's xQueryPhrase counts.
// Statistics, postings and the change signature come from one read transaction: one moment of the database.

import Database from 'better-sqlite3';
import type { LexicalField, LexicalSnapshot, LexicalStore, QueryTokenizer } from '../types.js';
import { readChangeSignature } from './corpus.js';
import type { Db } from './db.js';
import { decodeAverages, decodeRowLength } from './fts5-record.js';
import { createQueryTokenizer } from './query-tokenizer.js';

const FTS_TABLE = 'chunks_fts';
const DEFAULT_TOKENIZE = 'porter unicode61 remove_diacritics 2';

function openSnapshot(conn: Db, afterRelease: () => void): LexicalSnapshot {
  conn.exec(`CREATE VIRTUAL TABLE IF NOT EXISTS temp.sb_lexmem_instance USING fts5vocab(main, ${FTS_TABLE}, instance)`);
  // One read transaction for everything below (the caller's own, if it is in one already).
  const own = !conn.inTransaction;
  if (own) conn.exec('BEGIN');
  let released = false;
  const release = (): void => {
    if (released) return;
    released = true;
    try {
      if (own && conn.inTransaction) conn.exec('COMMIT');
    } finally {
      afterRelease();
    }
  };
  try {
    const signature = readChangeSignature(conn);
    const avg = decodeAverages(conn.prepare(`SELECT block FROM ${FTS_TABLE}_data WHERE id = 1`).pluck().get() as Buffer | undefined);
    const lengthCount = conn.prepare(`SELECT count(*) FROM ${FTS_TABLE}_docsize`).pluck().get() as number;
    return {
      signature,
      rows: avg.rows,
      tokens: avg.tokens,
      lengthCount,
      *rowLengths() {
        for (const [id, sz] of conn.prepare(`SELECT id, sz FROM ${FTS_TABLE}_docsize ORDER BY id`).raw().iterate() as IterableIterator<[number, Buffer]>) {
          yield [id, decodeRowLength(sz)];
        }
      },
      rowCollections() {
        return conn.prepare('SELECT k.id, d.collection FROM chunks k JOIN documents d ON d.id = k.document_id').raw().iterate() as IterableIterator<[number, string]>;
      },
      collectionNames() {
        return conn.prepare('SELECT name FROM collections').pluck().all() as string[];
      },
      // fts5vocab's instance table lists by term, then row, then column and offset.
      postings() {
        return conn.prepare('SELECT term, doc, col FROM temp.sb_lexmem_instance').raw().iterate() as IterableIterator<[string, number, LexicalField]>;
      },
      release,
    };
  } catch (err) {
    if (own && conn.inTransaction) conn.exec('ROLLBACK');
    afterRelease();
    throw err;
  }
}

export function sqliteLexical(db: Db): Omit<LexicalStore, 'searchFts'> {
  const concurrentReads = !db.memory;
  return {
    concurrentReads,
    lexicalSnapshot(opts = {}) {
      if (!opts.concurrent || !concurrentReads) return openSnapshot(db, () => undefined);
      // A read-only connection of the snapshot's own, closed with it: its read transaction holds one moment of
      // the database however long the reader takes, while writers go on (WAL).
      const reader = new Database(db.name, { readonly: true, fileMustExist: true });
      reader.pragma('busy_timeout = 10000');
      return openSnapshot(reader, () => reader.close());
    },
    queryTokenizer(): QueryTokenizer {
      const sql = db.prepare('SELECT sql FROM sqlite_master WHERE name = ?').pluck().get(FTS_TABLE) as string | undefined;
      return createQueryTokenizer(/tokenize\s*=\s*'([^']*)'/i.exec(sql ?? '')?.[1] ?? DEFAULT_TOKENIZE);
    },
  };
}
