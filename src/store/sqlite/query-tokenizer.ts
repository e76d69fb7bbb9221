import Database from 'better-sqlite3';
import type { LexicalField, QueryTokenizer } from '../types.js';

/**
 * FTS5's tokens for query words, from a private in-memory FTS5 table with the store's tokenizer: each word
 * is a row, fts5vocab lists the tokens per row in order. Results are cached (words recur across queries).
 */
export function createQueryTokenizer(spec: string): QueryTokenizer {
  const mem = new Database(':memory:');
  mem.exec(`CREATE VIRTUAL TABLE tok USING fts5(w, tokenize='${spec.replace(/'/g, "''")}');
    CREATE VIRTUAL TABLE tok_instance USING fts5vocab(tok, instance);`);
  const insert = mem.prepare('INSERT INTO tok (rowid, w) VALUES (?, ?)');
  const read = mem.prepare('SELECT doc, term FROM tok_instance ORDER BY doc, offset').raw();
  const clear = mem.prepare('DELETE FROM tok');
  const cache = new Map<string, string[]>();
  const fill = mem.transaction((missing: string[]) => {
    missing.forEach((w, i) => insert.run(i + 1, w));
    const out: string[][] = missing.map(() => []);
    for (const [doc, term] of read.all() as [number, string][]) out[doc - 1]!.push(term);
    clear.run();
    return out;
  });
  const fn = (words: readonly string[]): string[][] => {
    const missing = [...new Set(words.filter((w) => !cache.has(w)))];
    if (missing.length > 0) {
      if (cache.size > 100_000) cache.clear();
      const got = fill(missing);
      missing.forEach((w, i) => cache.set(w, got[i]!));
    }
    return words.map((w) => cache.get(w)!);
  };
  return Object.assign(fn, { close: () => mem.close() });
}

/** The postings of whole rows (title, heading, body), tokenized exactly as the lexical index tokenizes them. */
export interface RowTokenizer {
  (rows: readonly [title: string, heading: string, body: string][]): [term: string, field: LexicalField][][];
  close(): void;
}

/**
 * FTS5's postings of rows, from a private in-memory FTS5 table of the store's three columns and tokenizer: the
 * rows are inserted, fts5vocab lists every instance with its column, the table is emptied again.
 */
export function createRowTokenizer(spec: string): RowTokenizer {
  const mem = new Database(':memory:');
  // Contentless, so that emptying it is one 'delete-all' command rather than tokenizing every row again.
  mem.exec(`CREATE VIRTUAL TABLE tok USING fts5(title, heading, body, content='', tokenize='${spec.replace(/'/g, "''")}');
    CREATE VIRTUAL TABLE tok_instance USING fts5vocab(tok, instance);`);
  const insert = mem.prepare('INSERT INTO tok (rowid, title, heading, body) VALUES (?, ?, ?, ?)');
  const read = mem.prepare('SELECT doc, term, col FROM tok_instance').raw();
  const clear = mem.prepare("INSERT INTO tok (tok) VALUES ('delete-all')");
  const run = mem.transaction((rows: readonly [string, string, string][]) => {
    rows.forEach((r, i) => insert.run(i + 1, r[0], r[1], r[2]));
    const out: [string, LexicalField][][] = rows.map(() => []);
    // Row by row, not all(): the instance rows (one per token) are garbage at once, not held as one array.
    for (const [doc, term, col] of read.iterate() as IterableIterator<[number, string, LexicalField]>) out[doc - 1]!.push([term, col]);
    clear.run();
    return out;
  });
  return Object.assign((rows: readonly [string, string, string][]) => (rows.length === 0 ? [] : run(rows)), { close: () => mem.close() });
}
