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
import type { LexicalDelta, LexicalField, LexicalRowChange, LexicalSnapshot, LexicalStore, QueryTokenizer } from '../types.js';
import { readChangeSignature } from './corpus.js';
import type { Db } from './db.js';
import { decodeAverages, decodeRowLength } from './fts5-record.js';
import { createQueryTokenizer, createRowTokenizer, type RowTokenizer } from './query-tokenizer.js';

const FTS_TABLE = 'chunks_fts';
const DEFAULT_TOKENIZE = 'porter unicode61 remove_diacritics 2';
/**
 * Log entries kept: a writer opening the store drops older ones. A reader further behind than this reads the table
 * again (a full re-index of 100k chunks logs about 300k entries; an entry is a few dozen bytes on disk).
 */
export const LEXICAL_LOG_KEEP = 1_000_000;
/**
 * Rows read and tokenized together when following the change log. Their postings (one small array per token,
 * about 15 KiB a row of 120 words) are alive until the batch has been handed over: kept small, a batch is done
 * between two of V8's young-generation collections and dies young, where 256 rows at once outlived two of them
 * and were promoted to the old generation as garbage.
 */
const DELTA_BATCH = 64;
const NO_POSTINGS: [string, LexicalField][] = [];
const HEAD_SQL = "SELECT coalesce((SELECT seq FROM sqlite_sequence WHERE name = 'lexical_log'), 0)";

const statements = new WeakMap<Db, Map<string, Database.Statement>>();
/** A statement prepared once per connection (a delta is read after every change; preparing costs more than the read). */
function stmt(conn: Db, sql: string): Database.Statement {
  let m = statements.get(conn);
  if (!m) statements.set(conn, (m = new Map()));
  let st = m.get(sql);
  if (!st) m.set(sql, (st = conn.prepare(sql)));
  return st;
}

function tokenizeSpec(conn: Db): string {
  const sql = conn.prepare('SELECT sql FROM sqlite_master WHERE name = ?').pluck().get(FTS_TABLE) as string | undefined;
  return /tokenize\s*=\s*'([^']*)'/i.exec(sql ?? '')?.[1] ?? DEFAULT_TOKENIZE;
}

/** Runs `read` inside one read transaction on `conn` (the caller's own, if it is in one already); `release` ends it. */
function readTransaction<T>(conn: Db, afterRelease: () => void, read: (release: () => void) => T): T {
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
    return read(release);
  } catch (err) {
    if (own && conn.inTransaction) conn.exec('ROLLBACK');
    afterRelease();
    throw err;
  }
}

/**
 * The rows logged after `since`, each read as it is now with its postings (tokenized again from the fields the
 * regular content table keeps, by the index's own tokenizer) and its length from FTS5's docsize record.
 */
function openDelta(conn: Db, since: number, afterRelease: () => void, tokenize: RowTokenizer): LexicalDelta {
  return readTransaction(conn, afterRelease, (release) => {
    const head = stmt(conn, HEAD_SQL).pluck().get() as number;
    const first = stmt(conn, 'SELECT min(seq) FROM lexical_log').pluck().get() as number | null;
    // Complete when nothing is missing between `since` and the oldest entry still kept.
    const complete = head <= since || (first !== null && first <= since + 1);
    const ids = complete ? (stmt(conn, 'SELECT DISTINCT chunk_id FROM lexical_log WHERE seq > ? ORDER BY chunk_id').pluck().all(since) as number[]) : [];
    const avg = decodeAverages(stmt(conn, `SELECT block FROM ${FTS_TABLE}_data WHERE id = 1`).pluck().get() as Buffer | undefined);
    const readRow = stmt(
      conn,
      `SELECT c.c0, c.c1, c.c2, s.sz, d.collection FROM ${FTS_TABLE}_content c JOIN ${FTS_TABLE}_docsize s ON s.id = c.id
      LEFT JOIN chunks k ON k.id = c.id LEFT JOIN documents d ON d.id = k.document_id WHERE c.id = ?`,
    ).raw();
    return {
      head,
      complete,
      rows: avg.rows,
      tokens: avg.tokens,
      count: ids.length,
      *changes(): Generator<LexicalRowChange> {
        {
          for (let at = 0; at < ids.length; at += DELTA_BATCH) {
            const batch = ids.slice(at, at + DELTA_BATCH);
            const found = batch.map((id) => readRow.get(id) as [string | null, string | null, string | null, Buffer, string | null] | undefined);
            const postings = tokenize(found.flatMap((r) => (r ? [[r[0] ?? '', r[1] ?? '', r[2] ?? ''] as [string, string, string]] : [])));
            let p = 0;
            for (let i = 0; i < batch.length; i++) {
              const r = found[i];
              // Each row's text and postings are let go as soon as the row is handed over: a reader that gives the
              // event loop a turn between rows (the request thread's catch-up) then holds none of the batch's
              // garbage across the turn, and V8 collects it young instead of promoting it to the old generation.
              found[i] = undefined;
              if (!r) {
                yield { rowId: batch[i]!, row: null };
                continue;
              }
              const length = decodeRowLength(r[3]);
              const rowPostings = postings[p]!;
              postings[p++] = NO_POSTINGS;
              // The index's own record and a fresh tokenization must agree, or the copy would rank differently.
              if (rowPostings.length !== length) throw new Error(`lexical row ${batch[i]}: ${rowPostings.length} tokens read again, ${length} recorded`);
              yield { rowId: batch[i]!, row: { collection: r[4], length, postings: rowPostings } };
            }
          }
        }
      },
      release,
    };
  });
}

function openSnapshot(conn: Db, afterRelease: () => void): LexicalSnapshot {
  conn.exec(`CREATE VIRTUAL TABLE IF NOT EXISTS temp.sb_lexmem_instance USING fts5vocab(main, ${FTS_TABLE}, instance)`);
  return readTransaction(conn, afterRelease, (release) => {
    const signature = readChangeSignature(conn);
    const head = conn.prepare(HEAD_SQL).pluck().get() as number;
    const avg = decodeAverages(conn.prepare(`SELECT block FROM ${FTS_TABLE}_data WHERE id = 1`).pluck().get() as Buffer | undefined);
    const lengthCount = conn.prepare(`SELECT count(*) FROM ${FTS_TABLE}_docsize`).pluck().get() as number;
    return {
      signature,
      head,
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
  });
}

export function sqliteLexical(db: Db, opts: { logKeep?: number } = {}): Omit<LexicalStore, 'searchFts'> {
  const concurrentReads = !db.memory;
  const keep = opts.logKeep ?? LEXICAL_LOG_KEEP;
  // (A store opened on a schema before migration 9, as a migration test does, has no log yet.)
  if (!db.readonly && db.prepare("SELECT 1 FROM sqlite_master WHERE name = 'lexical_log'").get() !== undefined) {
    const span = db.prepare('SELECT coalesce(max(seq) - min(seq), 0) FROM lexical_log').pluck().get() as number;
    if (span >= keep) db.prepare('DELETE FROM lexical_log WHERE seq <= (SELECT max(seq) FROM lexical_log) - ?').run(keep);
  }
  const head = db.prepare(HEAD_SQL).pluck();
  // One private tokenizer for every delta (an in-memory database of its own), made on first use.
  let rowTokenizer: RowTokenizer | null = null;
  const tokenizer = (): RowTokenizer => (rowTokenizer ??= createRowTokenizer(tokenizeSpec(db)));
  /** `open` on the store's connection, or on a read-only connection of its own when `concurrent`. */
  const onConnection = <T>(concurrent: boolean | undefined, open: (conn: Db, afterRelease: () => void) => T): T => {
    if (!concurrent || !concurrentReads) return open(db, () => undefined);
    // A read-only connection of the reader's own, closed with it: its read transaction holds one moment of the
    // database however long the reader takes, while writers go on (WAL).
    const reader = new Database(db.name, { readonly: true, fileMustExist: true });
    reader.pragma('busy_timeout = 10000');
    return open(reader, () => reader.close());
  };
  return {
    concurrentReads,
    lexicalSnapshot(opts = {}) {
      return onConnection(opts.concurrent, openSnapshot);
    },
    lexicalHead() {
      return head.get() as number;
    },
    lexicalChanges(since, opts = {}) {
      return onConnection(opts.concurrent, (conn, after) => openDelta(conn, since, after, tokenizer()));
    },
    queryTokenizer(): QueryTokenizer {
      return createQueryTokenizer(tokenizeSpec(db));
    },
  };
}
