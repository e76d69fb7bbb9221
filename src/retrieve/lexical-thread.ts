// The request thread's side of the lexical change thread (src/lexical-worker.ts): one worker per in-memory index,
// asked for the rows changed since a log position, answering with plain data. One request at a time.
import { existsSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import { PACKAGE_ROOT } from '../config/index.js';
import type { FromLexicalThread, LexicalThreadData, ToLexicalThread } from '../lexical-worker.js';
import type { LexicalChangeSet } from '../store/index.js';

/** Reads change sets somewhere other than the caller's thread. */
export interface LexicalChangeReader {
  /** The rows changed after `since`; null when more than `limit` log entries follow it (too many to hand over). */
  read(since: number, limit: number): Promise<LexicalChangeSet | null>;
  close(): void;
}

/** dist/lexical-worker.js beside the compiled code; from src/ (tests) the compiled copy. */
function lexicalWorkerScript(): string {
  const beside = fileURLToPath(new URL('../lexical-worker.js', import.meta.url));
  return existsSync(beside) ? beside : path.join(PACKAGE_ROOT, 'dist', 'lexical-worker.js');
}

/** A change reader on a worker thread with its own read-only connection to `database`. */
export function createLexicalChangeThread(database: string): LexicalChangeReader {
  const workerData: LexicalThreadData = { database };
  let worker: Worker | null = null;
  let nextId = 1;
  const waiting = new Map<number, { resolve: (s: LexicalChangeSet | null) => void; reject: (e: Error) => void }>();
  const failAll = (err: Error): void => {
    for (const w of waiting.values()) w.reject(err);
    waiting.clear();
  };
  const start = (): Worker => {
    const w = new Worker(lexicalWorkerScript(), { workerData });
    // The thread never keeps the process alive: it only answers requests.
    w.unref();
    w.on('message', (m: FromLexicalThread) => {
      const at = waiting.get(m.id);
      if (!at) return;
      waiting.delete(m.id);
      if ('error' in m) at.reject(new Error(`the lexical change thread failed: ${m.error}`));
      else at.resolve(m.set);
    });
    w.once('error', (err) => {
      if (worker === w) worker = null;
      failAll(err);
    });
    w.once('exit', (code) => {
      if (worker === w) worker = null;
      failAll(new Error(`the lexical change thread exited with code ${code}`));
    });
    return w;
  };
  let closed = false;
  return {
    read(since, limit) {
      if (closed) return Promise.reject(new Error('the lexical change thread is closed'));
      const w = (worker ??= start());
      const id = nextId++;
      return new Promise((resolve, reject) => {
        waiting.set(id, { resolve, reject });
        w.postMessage({ id, since, limit } satisfies ToLexicalThread);
      });
    },
    close() {
      closed = true;
      const w = worker;
      worker = null;
      failAll(new Error('the lexical change thread is closed'));
      void w?.terminate();
    },
  };
}
