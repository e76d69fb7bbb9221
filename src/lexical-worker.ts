// The lexical change thread: reads the rows the lexical change log names (src/store/sqlite/lexical.ts) and
// tokenizes them again, off the thread that answers queries. The in-memory lexical index
// (src/retrieve/lexical-memory.ts) sends the log position it holds; this thread answers with every row changed
// since, as it is now, and the statistics of the same moment (one read transaction on its own read-only
// connection). The request thread then applies the whole answer in one synchronous step, so a query never sees
// half a change, and until then queries are answered by the index as it was: a consistent earlier moment.
import { parentPort, workerData } from 'node:worker_threads';
import { openStore, type LexicalChangeSet } from './store/index.js';

export interface LexicalThreadData {
  database: string;
}

/** A request: the rows changed after `since`, unless more than `limit` log entries follow it. */
export interface ToLexicalThread {
  id: number;
  since: number;
  limit: number;
}

/** The answer: the change set, null when more than `limit` entries follow `since`, or the error's message. */
export type FromLexicalThread = { id: number; set: LexicalChangeSet | null } | { id: number; error: string };

const data = workerData as LexicalThreadData;
const store = openStore(data.database, { readonly: true, mmap: false });

parentPort?.on('message', (m: ToLexicalThread) => {
  try {
    if (store.lexicalHead() - m.since > m.limit) {
      parentPort?.postMessage({ id: m.id, set: null } satisfies FromLexicalThread);
      return;
    }
    const delta = store.lexicalChanges(m.since);
    try {
      const set: LexicalChangeSet = { head: delta.head, complete: delta.complete, rows: delta.rows, tokens: delta.tokens, count: delta.count, changes: [...delta.changes()] };
      parentPort?.postMessage({ id: m.id, set } satisfies FromLexicalThread);
    } finally {
      delta.release();
    }
  } catch (err) {
    parentPort?.postMessage({ id: m.id, error: err instanceof Error ? err.message : String(err) } satisfies FromLexicalThread);
  }
});
parentPort?.once('close', () => store.close());
