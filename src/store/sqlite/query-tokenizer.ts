import Database from 'better-sqlite3';
import type { QueryTokenizer } from '../types.js';

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
