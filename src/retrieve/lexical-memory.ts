// An in-memory inverted index that scores exactly as the FTS5 path does, without FTS5's per-row bm25() work.
//
// Why: FTS5 evaluates bm25() once per matching row and per query phrase, and a term's weight can only be
// carried by repeating its phrase (query-text.ts). RM3's second pass matches tens of thousands of rows with
// 30–60 phrases, which dominates hybrid latency at 100k chunks (docs/benchmarks.md, "Retrieval speed").
// Here a term is looked up once, its weight is a multiplier, and scores accumulate in a typed array.
//
// Exactness: the index is read from the FTS5 index itself, so terms are FTS5's tokens (porter stemming and
// diacritic folding included) and query words are tokenized by FTS5 too (a tiny in-memory FTS5 table with
// the same tokenizer and an fts5vocab table over it). Statistics are the ones FTS5's bm25() reads:
//   - N and the total token count from the table's averages record (`<table>_data` id 1), as xRowCount and
//     xColumnTotalSize(-1) return them; avgdl = total / N;
//   - |d| from the docsize table (xColumnSize(-1): tokens over all columns of the row);
//   - n(t), the rows matching the phrase, from the postings (xQueryPhrase counts the same live rows).
// and the formula is the one of SQLite's fts5_aux.c, fts5Bm25Function (sqlite.org/fts5.html, "The bm25()
// function"; summarised here from that source, which also clamps a non-positive idf to 1e-6):
//   score = sum over phrases i of idf_i * f_i * (k1 + 1) / (f_i + k1 * (1 - b + b * |d| / avgdl))
//   f_i   = sum over the phrase's instances in the row of the weight of the instance's column
//   idf_i = ln((N - n_i + 0.5) / (n_i + 0.5)), clamped to 1e-6 when <= 0;  k1 = 1.2, b = 0.75
// FTS5's statistics span the whole table (every collection), so this index does too, and keeps each row's
// collection to answer for one. tests/retrieve/lexical-memory.test.ts checks ids and scores against FTS5.
//
// Staying in step: the index is tagged with the (name, generation) pairs of all collections read in the same
// read transaction as the postings. A query whose collections table says otherwise is not answered here
// (the caller falls back to FTS5) and a rebuild starts; the new index replaces the old one only once whole.

import Database from 'better-sqlite3';
import type { Db } from '../store/db.js';
import type { FtsWeights } from '../store/repository.js';
import type { WeightedTerm } from './query-text.js';

const K1 = 1.2;
const B = 0.75;
const FTS_TABLE = 'chunks_fts';
const DEFAULT_TOKENIZE = 'porter unicode61 remove_diacritics 2';
/** Longest stretch of a background build between two turns of the event loop. */
const SLICE_MS = 15;

/** One query phrase of the FTS5 path: a term and how many times its phrase would be written. */
export interface PhraseCount {
  term: string;
  count: number;
}

/**
 * The repeat counts the FTS5 path writes for weighted terms (toWeightedMatch in query-text.ts): weights scaled
 * so the heaviest gets `maxRepeat`, rounded, at least 1, divided by their greatest common divisor. Used here as
 * multipliers, so both engines score the same weighted query.
 */
export function phraseCounts(terms: readonly WeightedTerm[], opts: { maxTerms?: number; maxRepeat?: number } = {}): PhraseCount[] {
  const maxTerms = opts.maxTerms ?? 64;
  const maxRepeat = opts.maxRepeat ?? 4;
  const kept = terms.filter((t) => t.weight > 0 && t.term !== '').slice(0, maxTerms);
  if (kept.length === 0) return [];
  const top = Math.max(...kept.map((t) => t.weight));
  const counts = kept.map((t) => Math.max(1, Math.min(maxRepeat, Math.round((t.weight / top) * maxRepeat))));
  const g = counts.reduce(gcd);
  return kept.map((t, i) => ({ term: t.term, count: counts[i]! / g }));
}

function gcd(a: number, b: number): number {
  while (b) [a, b] = [b, a % b];
  return a;
}

/** A column weight as the FTS5 path hands it to bm25() (repository.ts `num`: six decimals, else 1). */
function ftsWeight(x: number): number {
  return Number.isFinite(x) && x >= 0 ? Number(x.toFixed(6)) : 1;
}

/** SQLite's varint (sqlite3GetVarint): 7 bits a byte, high bit = more, the 9th byte whole. */
function readVarint(buf: Uint8Array, pos: number): [number, number] {
  let v = 0;
  for (let i = 0; i < 8; i++) {
    const byte = buf[pos + i];
    if (byte === undefined) throw new Error('truncated varint');
    v = v * 128 + (byte & 0x7f);
    if ((byte & 0x80) === 0) return [v, pos + i + 1];
  }
  const last = buf[pos + 8];
  if (last === undefined) throw new Error('truncated varint');
  return [v * 256 + last, pos + 9];
}

/** All varints of a record. */
function readVarints(buf: Uint8Array): number[] {
  const out: number[] = [];
  let pos = 0;
  while (pos < buf.length) {
    const [v, next] = readVarint(buf, pos);
    out.push(v);
    pos = next;
  }
  return out;
}

/** The built index: immutable once published. */
interface Snapshot {
  signature: string;
  builtAt: number;
  buildMs: number;
  nRow: number;
  avgdl: number;
  /** Row ids in ascending order, one per slot. */
  rowids: Float64Array;
  /** Collection ordinal of each slot (-1: an FTS row with no chunk). */
  collectionOf: Int32Array;
  collections: Map<string, number>;
  /** k1 * (1 - b + b * |d| / avgdl) per slot: the length part of the BM25 denominator. */
  lengthNorm: Float64Array;
  terms: Map<string, number>;
  /** Postings of term t: [start[t], start[t + 1]). */
  start: Uint32Array;
  slot: Uint32Array;
  tfTitle: Uint16Array;
  tfHeading: Uint16Array;
  tfBody: Uint16Array;
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
   * true: build in slices on a second, read-only connection (one read transaction, so one snapshot) and give
   * the event loop a turn between slices; queries are answered by FTS5 meanwhile. false: build inside the
   * first query that needs it. An in-memory database always builds synchronously (no second connection).
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

const SIGNATURE_SQL = "SELECT coalesce(group_concat(name || char(31) || generation, char(30)), '') FROM (SELECT name, generation FROM collections ORDER BY name)";

export function createLexicalMemory(db: Db, opts: LexicalMemoryOptions = {}): LexicalMemory {
  const background = (opts.background ?? false) && !db.memory;
  const minGap = opts.minRebuildGapMs ?? 5000;
  const signatureStmt = db.prepare(SIGNATURE_SQL).pluck();
  const tokenizeSpec = (() => {
    const sql = db.prepare("SELECT sql FROM sqlite_master WHERE name = ?").pluck().get(FTS_TABLE) as string | undefined;
    return /tokenize\s*=\s*'([^']*)'/i.exec(sql ?? '')?.[1] ?? DEFAULT_TOKENIZE;
  })();
  const tokens = createQueryTokenizer(tokenizeSpec);

  let current: Snapshot | null = null;
  let building: { done: Promise<void> } | null = null;
  let lastStart = -Infinity;
  let lastFailure = -Infinity;
  let builds = 0;
  let closed = false;
  let reader: Db | null = null;
  // Scratch space for one query, sized to the current snapshot.
  let acc = new Float64Array(0);
  let seen = new Uint8Array(0);
  let mask = new Uint8Array(0);
  let touched = new Uint32Array(0);

  const publish = (s: Snapshot): void => {
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
      const steps = buildSteps(db);
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
    reader ??= new Database(db.name, { readonly: true, fileMustExist: true });
    reader.pragma('busy_timeout = 10000');
    const conn = reader;
    const done = new Promise<void>((resolve) => {
      const steps = buildSteps(conn);
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
  const usable = (): Snapshot | null => {
    const sig = signatureStmt.get() as string;
    if (current && current.signature === sig) return current;
    if (!background) {
      buildSync();
      return current && (current as Snapshot).signature === sig ? current : null;
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
      const sig = signatureStmt.get() as string;
      if (!current || current.signature !== sig) buildSync();
    },
    async whenReady() {
      for (;;) {
        if (closed) return;
        const sig = signatureStmt.get() as string;
        if (current && current.signature === sig) return;
        if (!background) {
          buildSync();
          if (!current || current.signature !== (signatureStmt.get() as string)) return;
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
      if (reader?.open && !building) reader.close();
      else if (building) void building.done.then(() => reader?.open && reader.close());
    },
  };
}

/** Slot of a row id (binary search over the ascending row ids), or -1. */
function slotOf(rowids: Float64Array, id: number): number {
  let lo = 0;
  let hi = rowids.length - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >>> 1;
    const v = rowids[mid]!;
    if (v === id) return mid;
    if (v < id) lo = mid + 1;
    else hi = mid - 1;
  }
  return -1;
}

/** Best `limit` of the touched slots by score (ties: lower row id first), via a bounded min-heap. */
function topK(touched: Uint32Array, n: number, acc: Float64Array, rowids: Float64Array, limit: number): { chunkId: number; score: number }[] {
  const k = Math.min(limit, n);
  const heap = new Uint32Array(k);
  let size = 0;
  // "a is worse than b": lower score, or equal score and higher row id.
  const worse = (a: number, b: number): boolean => acc[a]! < acc[b]! || (acc[a] === acc[b] && rowids[a]! > rowids[b]!);
  const down = (i: number): void => {
    for (;;) {
      const l = 2 * i + 1;
      const r = l + 1;
      let m = i;
      if (l < size && worse(heap[l]!, heap[m]!)) m = l;
      if (r < size && worse(heap[r]!, heap[m]!)) m = r;
      if (m === i) return;
      const tmp = heap[i]!;
      heap[i] = heap[m]!;
      heap[m] = tmp;
      i = m;
    }
  };
  for (let i = 0; i < n; i++) {
    const slot = touched[i]!;
    if (size < k) {
      let j = size++;
      heap[j] = slot;
      while (j > 0) {
        const parent = (j - 1) >> 1;
        if (!worse(heap[j]!, heap[parent]!)) break;
        const tmp = heap[j]!;
        heap[j] = heap[parent]!;
        heap[parent] = tmp;
        j = parent;
      }
    } else if (k > 0 && worse(heap[0]!, slot)) {
      heap[0] = slot;
      down(0);
    }
  }
  const out = Array.from(heap.subarray(0, size));
  out.sort((a, b) => (worse(a, b) ? 1 : worse(b, a) ? -1 : 0));
  return out.map((slot) => ({ chunkId: rowids[slot]!, score: acc[slot]! }));
}

/**
 * Reads the FTS5 index in one read transaction, yielding between slices. The statistics, the postings and the
 * collection signature all come from that one snapshot.
 */
function* buildSteps(conn: Db): Generator<void, Snapshot, void> {
  const t0 = performance.now();
  conn.exec(`CREATE VIRTUAL TABLE IF NOT EXISTS temp.sb_lexmem_instance USING fts5vocab(main, ${FTS_TABLE}, instance)`);
  // One read transaction for everything below (the caller's own, if it is in one already).
  const own = !conn.inTransaction;
  if (own) conn.exec('BEGIN');
  let committed = !own;
  try {
    const signature = conn.prepare(SIGNATURE_SQL).pluck().get() as string;
    // Averages record: N, then each column's token total (fts5_index.c, id FTS5_AVERAGES_ROWID = 1).
    const avg = conn.prepare(`SELECT block FROM ${FTS_TABLE}_data WHERE id = 1`).pluck().get() as Buffer | undefined;
    const totals = avg ? readVarints(avg) : [0];
    const nRow = totals[0] ?? 0;
    const nToken = totals.slice(1).reduce((s, x) => s + x, 0);
    const avgdl = nRow > 0 ? nToken / nRow : 1;
    // Row lengths: the docsize table, one varint per column.
    // Iterators stay open across the yields: in the background the connection is the build's alone.
    let sliceStart = performance.now();
    const due = (): boolean => performance.now() - sliceStart >= SLICE_MS;
    const nSizes = conn.prepare(`SELECT count(*) FROM ${FTS_TABLE}_docsize`).pluck().get() as number;
    const rowids = new Float64Array(nSizes);
    const lengthNorm = new Float64Array(nSizes);
    let nDocs = 0;
    for (const [id, sz] of conn.prepare(`SELECT id, sz FROM ${FTS_TABLE}_docsize ORDER BY id`).raw().iterate() as IterableIterator<[number, Buffer]>) {
      rowids[nDocs] = id;
      const d = readVarints(sz).reduce((s, x) => s + x, 0);
      lengthNorm[nDocs++] = K1 * (1 - B + (B * d) / avgdl);
      if ((nDocs & 1023) === 0 && due()) {
        yield;
        sliceStart = performance.now();
      }
    }
    if (nDocs !== nSizes) throw new Error('docsize table changed inside a read transaction');
    const collections = new Map<string, number>();
    const collectionOf = new Int32Array(nSizes).fill(-1);
    let seenChunks = 0;
    for (const [id, name] of conn.prepare('SELECT k.id, d.collection FROM chunks k JOIN documents d ON d.id = k.document_id').raw().iterate() as IterableIterator<[number, string]>) {
      const slot = slotOf(rowids, id);
      if (++seenChunks % 1024 === 0 && due()) {
        yield;
        sliceStart = performance.now();
      }
      if (slot < 0) continue;
      let c = collections.get(name);
      if (c === undefined) collections.set(name, (c = collections.size));
      collectionOf[slot] = c;
    }
    // Collections with no chunk yet still exist (an empty answer, not "cannot answer").
    for (const name of conn.prepare('SELECT name FROM collections').pluck().all() as string[]) if (!collections.has(name)) collections.set(name, collections.size);

    const terms = new Map<string, number>();
    let starts = new Uint32Array(1 << 16);
    let cap = 1 << 20;
    let slot = new Uint32Array(cap);
    let tfT = new Uint16Array(cap);
    let tfH = new Uint16Array(cap);
    let tfB = new Uint16Array(cap);
    let n = 0;
    let curTerm: string | null = null;
    let curRow = -1;
    let curSlot = -1;
    const grow = (): void => {
      cap *= 2;
      const s2 = new Uint32Array(cap);
      s2.set(slot);
      slot = s2;
      const t2 = new Uint16Array(cap);
      t2.set(tfT);
      tfT = t2;
      const h2 = new Uint16Array(cap);
      h2.set(tfH);
      tfH = h2;
      const b2 = new Uint16Array(cap);
      b2.set(tfB);
      tfB = b2;
    };
    const bump = (arr: Uint16Array, i: number): void => {
      if (arr[i]! < 0xffff) arr[i] = arr[i]! + 1;
      else throw new Error('a term occurs more than 65535 times in one column of one chunk');
    };
    let rows = 0;
    for (const [term, doc, col] of conn.prepare('SELECT term, doc, col FROM temp.sb_lexmem_instance').raw().iterate() as IterableIterator<[string, number, string]>) {
      if ((++rows & 4095) === 0 && due()) {
        yield;
        sliceStart = performance.now();
      }
      if (term !== curTerm) {
        const t = terms.size;
        terms.set(term, t);
        if (t + 2 > starts.length) {
          const s2 = new Uint32Array(starts.length * 2);
          s2.set(starts);
          starts = s2;
        }
        starts[t] = n;
        curTerm = term;
        curRow = -1;
      }
      if (doc !== curRow) {
        curRow = doc;
        curSlot = slotOf(rowids, doc);
        if (curSlot < 0) continue;
        if (n === cap) grow();
        slot[n] = curSlot;
        tfT[n] = 0;
        tfH[n] = 0;
        tfB[n] = 0;
        n++;
      } else if (curSlot < 0) continue;
      if (col === 'body') bump(tfB, n - 1);
      else if (col === 'title') bump(tfT, n - 1);
      else bump(tfH, n - 1);
    }
    starts[terms.size] = n;
    if (own) conn.exec('COMMIT');
    committed = true;
    return {
      signature,
      builtAt: Date.now(),
      buildMs: performance.now() - t0,
      nRow,
      avgdl,
      rowids,
      collectionOf,
      collections,
      lengthNorm,
      terms,
      start: starts.slice(0, terms.size + 1),
      slot: slot.slice(0, n),
      tfTitle: tfT.slice(0, n),
      tfHeading: tfH.slice(0, n),
      tfBody: tfB.slice(0, n),
    };
  } finally {
    if (!committed && conn.inTransaction) conn.exec('ROLLBACK');
  }
}

/**
 * FTS5's tokens for query words, from a private in-memory FTS5 table with the store's tokenizer: each word
 * is a row, fts5vocab lists the tokens per row in order. Results are cached (words recur across queries).
 */
function createQueryTokenizer(spec: string): ((words: readonly string[]) => string[][]) & { close(): void } {
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
