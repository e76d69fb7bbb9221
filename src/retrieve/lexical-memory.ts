// An in-memory inverted index that scores exactly as the FTS5 path does, without FTS5's per-row bm25() work.
//
// Why: FTS5 evaluates bm25() once per matching row and per query phrase, and a term's weight can only be
// carried by repeating its phrase (query-text.ts). RM3's second pass matches tens of thousands of rows with
// 30–60 phrases, which dominates hybrid latency at 100k chunks (docs/benchmarks.md, "Retrieval speed").
// Here a term is looked up once, its weight is a multiplier, and scores accumulate in a typed array.
//
// Exactness: the index is a copy of the store's own lexical index (FTS5's, read through the store's lexical
// snapshot: src/store/sqlite/lexical.ts), so terms are FTS5's tokens (porter stemming and diacritic folding
// included), query words are tokenized by the store's tokenizer, and the statistics are the ones FTS5's bm25()
// reads: N, the total token count (avgdl = total / N), each row's length |d|, and n(t) from the postings.
// The formula is the one of SQLite's fts5_aux.c, fts5Bm25Function (sqlite.org/fts5.html, "The bm25()
// function"; summarised here from that source, which also clamps a non-positive idf to 1e-6):
//   score = sum over phrases i of idf_i * f_i * (k1 + 1) / (f_i + k1 * (1 - b + b * |d| / avgdl))
//   f_i   = sum over the phrase's instances in the row of the weight of the instance's column
//   idf_i = ln((N - n_i + 0.5) / (n_i + 0.5)), clamped to 1e-6 when <= 0;  k1 = 1.2, b = 0.75
// FTS5's statistics span the whole table (every collection), so this index does too, and keeps each row's
// collection to answer for one. tests/retrieve/lexical-memory.test.ts checks ids and scores against FTS5.
//
// Staying in step: the index is tagged with the store's change signature (every collection's generation) read
// in the same snapshot as the postings. A query whose collections table says otherwise is not answered here
// (the caller falls back to FTS5) and a rebuild starts; the new index replaces the old one only once whole.

import type { FtsWeights, Repository } from '../store/index.js';
import { buildLexicalIndex, K1, type LexicalIndexData } from './lexical-build.js';
import type { PhraseCount } from './query-text.js';
import { slotOf, topK } from './top-k.js';

/** What the in-memory index reads from the store: the change signature, lexical snapshots and the tokenizer. */
export type LexicalSource = Pick<Repository, 'changeSignature' | 'lexicalSnapshot' | 'concurrentReads' | 'queryTokenizer'>;

/** A column weight as the FTS5 path hands it to bm25() (six decimals, else 1: store/sqlite/chunks.ts). */
function ftsWeight(x: number): number {
  return Number.isFinite(x) && x >= 0 ? Number(x.toFixed(6)) : 1;
}

export interface LexicalMemoryStats {
  ready: boolean;
  building: boolean;
  rows: number;
  terms: number;
  postings: number;
  /** Bytes held by the typed arrays (the term map's strings not counted). */
  arrayBytes: number;
  buildMs: number;
  builds: number;
}

export interface LexicalMemory {
  /**
   * The top `limit` chunks of `collection` for the weighted phrases, scored as FTS5's bm25() with the column
   * weights `w`, best first (ties by chunk id). `allowed` restricts to those chunk ids. Null when this index
   * cannot answer now: not built yet, behind the database, or a query word FTS5 splits into several tokens
   * (a phrase needs positions, which this index does not keep). The caller then asks FTS5.
   */
  search(collection: string, phrases: readonly PhraseCount[], limit: number, w: FtsWeights, allowed?: ReadonlySet<number>): { chunkId: number; score: number }[] | null;
  /** Builds (or rebuilds) now, synchronously, when the database has moved on. */
  syncNow(): void;
  /** Resolves once an index matching the database at call time (or later) is in place. */
  whenReady(): Promise<void>;
  stats(): LexicalMemoryStats;
  close(): void;
}

export interface LexicalMemoryOptions {
  /**
   * true: build in slices from a concurrent snapshot (one read transaction on a connection of its own) and
   * give the event loop a turn between slices; queries are answered by FTS5 meanwhile. false: build inside the
   * first query that needs it. A store without concurrent reads (in memory) always builds synchronously.
   */
  background?: boolean;
  /**
   * Least time between the starts of two rebuilds while collections keep changing (default 5 s); never less
   * than twice the last build's duration, so rebuilding takes at most about a third of one core.
   */
  minRebuildGapMs?: number;
  onBuilt?: (info: { rows: number; terms: number; postings: number; ms: number }) => void;
  onError?: (err: unknown) => void;
}

export function createLexicalMemory(store: LexicalSource, opts: LexicalMemoryOptions = {}): LexicalMemory {
  const background = (opts.background ?? false) && store.concurrentReads;
  const minGap = opts.minRebuildGapMs ?? 5000;
  const signature = (): string => store.changeSignature();
  const tokens = store.queryTokenizer();

  let current: LexicalIndexData | null = null;
  let building: { done: Promise<void> } | null = null;
  let lastStart = -Infinity;
  let lastFailure = -Infinity;
  let builds = 0;
  let closed = false;
  // Scratch space for one query, sized to the current snapshot.
  let acc = new Float64Array(0);
  let seen = new Uint8Array(0);
  let mask = new Uint8Array(0);
  let touched = new Uint32Array(0);

  const publish = (s: LexicalIndexData): void => {
    current = s;
    builds++;
    if (acc.length < s.rowids.length) {
      acc = new Float64Array(s.rowids.length);
      seen = new Uint8Array(s.rowids.length);
      mask = new Uint8Array(s.rowids.length);
      touched = new Uint32Array(s.rowids.length);
    }
    opts.onBuilt?.({ rows: s.rowids.length, terms: s.terms.size, postings: s.slot.length, ms: s.buildMs });
  };

  const buildSync = (): void => {
    if (closed || performance.now() - lastFailure < minGap) return;
    try {
      const steps = buildLexicalIndex(store.lexicalSnapshot());
      for (;;) {
        const r = steps.next();
        if (r.done) {
          publish(r.value);
          return;
        }
      }
    } catch (err) {
      // Not fatal: FTS5 answers instead, and the build is retried after the gap.
      lastFailure = performance.now();
      opts.onError?.(err);
    }
  };

  const startBackground = (): void => {
    if (building || closed) return;
    lastStart = performance.now();
    const done = new Promise<void>((resolve) => {
      let steps: ReturnType<typeof buildLexicalIndex>;
      try {
        steps = buildLexicalIndex(store.lexicalSnapshot({ concurrent: true }));
      } catch (err) {
        building = null;
        opts.onError?.(err);
        resolve();
        return;
      }
      const step = (): void => {
        if (closed) {
          steps.return(undefined as never);
          resolve();
          return;
        }
        try {
          const r = steps.next();
          if (r.done) {
            if (!closed) publish(r.value);
            building = null;
            resolve();
            return;
          }
          setImmediate(step);
        } catch (err) {
          building = null;
          opts.onError?.(err);
          resolve();
        }
      };
      setImmediate(step);
    });
    building = { done };
  };

  /** The snapshot if it matches the database now; otherwise null, after starting (or doing) a rebuild. */
  const usable = (): LexicalIndexData | null => {
    const sig = signature();
    if (current && current.signature === sig) return current;
    if (!background) {
      buildSync();
      return current && (current as LexicalIndexData).signature === sig ? current : null;
    }
    const gap = Math.max(minGap, 2 * (current?.buildMs ?? 0));
    if (!building && performance.now() - lastStart >= gap) startBackground();
    return null;
  };

  return {
    search(collection, phrases, limit, w, allowed) {
      if (closed || limit <= 0) return limit <= 0 ? [] : null;
      const s = usable();
      if (!s) return null;
      const col = s.collections.get(collection);
      if (col === undefined) return [];
      // Tokenize as FTS5 would; a word that is several tokens makes a phrase, which needs positions.
      const looked = tokens(phrases.map((p) => p.term));
      const wt = ftsWeight(w.title);
      const wh = ftsWeight(w.heading);
      const wb = ftsWeight(w.body);
      const n = s.rowids.length;
      if (allowed) {
        for (const id of allowed) {
          const slot = slotOf(s.rowids, id);
          if (slot >= 0) mask[slot] = 1;
        }
      }
      let nTouched = 0;
      try {
        for (let i = 0; i < phrases.length; i++) {
          const toks = looked[i]!;
          if (toks.length > 1) return null;
          if (toks.length === 0) continue; // an empty phrase matches nothing and adds nothing
          const t = s.terms.get(toks[0]!);
          if (t === undefined) continue;
          const from = s.start[t]!;
          const to = s.start[t + 1]!;
          const nHit = to - from;
          let idf = Math.log((s.nRow - nHit + 0.5) / (nHit + 0.5));
          if (idf <= 0) idf = 1e-6;
          const mult = phrases[i]!.count * idf;
          for (let p = from; p < to; p++) {
            const slot = s.slot[p]!;
            if (s.collectionOf[slot] !== col) continue;
            if (allowed && mask[slot] === 0) continue;
            const f = wt * s.tfTitle[p]! + wh * s.tfHeading[p]! + wb * s.tfBody[p]!;
            if (seen[slot] === 0) {
              seen[slot] = 1;
              touched[nTouched++] = slot;
            }
            acc[slot] = acc[slot]! + (mult * (f * (K1 + 1))) / (f + s.lengthNorm[slot]!);
          }
        }
        return topK(touched, nTouched, acc, s.rowids, limit);
      } finally {
        for (let i = 0; i < nTouched; i++) {
          const slot = touched[i]!;
          acc[slot] = 0;
          seen[slot] = 0;
        }
        if (allowed) mask.fill(0, 0, n);
      }
    },
    syncNow() {
      const sig = signature();
      if (!current || current.signature !== sig) buildSync();
    },
    async whenReady() {
      for (;;) {
        if (closed) return;
        const sig = signature();
        if (current && current.signature === sig) return;
        if (!background) {
          buildSync();
          if (!current || current.signature !== (signature())) return;
          continue;
        }
        if (!building) startBackground();
        if (!building) return;
        await building.done;
        if (!current) return; // the build failed (reported through onError)
      }
    },
    stats() {
      const s = current;
      const postings = s?.slot.length ?? 0;
      const rows = s?.rowids.length ?? 0;
      return {
        ready: s !== null,
        building: building !== null,
        rows,
        terms: s?.terms.size ?? 0,
        postings,
        arrayBytes: postings * (4 + 2 + 2 + 2) + rows * (8 + 4 + 8) + (s?.start.length ?? 0) * 4 + acc.length * (8 + 1 + 1 + 4),
        buildMs: s?.buildMs ?? 0,
        builds,
      };
    },
    close() {
      closed = true;
      current = null;
      tokens.close();
    },
  };
}
