// An in-memory inverted index that scores exactly as the FTS5 path does, without FTS5's per-row bm25() work, and
// follows the database change by change.
//
// Why: FTS5 evaluates bm25() once per matching row and per query phrase, and a term's weight can only be
// carried by repeating its phrase (query-text.ts). RM3's second pass matches tens of thousands of rows with
// 30–60 phrases, which dominates hybrid latency at 100k chunks (docs/benchmarks.md, "Retrieval speed").
// Here a term is looked up once, its weight is a multiplier, and scores accumulate in a typed array.
//
// Exactness: the index holds the store's own lexical rows (FTS5's, read through the store: src/store/sqlite/
// lexical.ts), so terms are FTS5's tokens (porter stemming and diacritic folding included), query words are
// tokenized by the store's tokenizer, and the statistics are the ones FTS5's bm25() reads: N and the total token
// count (avgdl = total / N) from FTS5's averages record, each row's length |d|, and n(t), the rows holding the
// term, over the whole table (every collection, as FTS5 counts). The formula is the one of SQLite's fts5_aux.c,
// fts5Bm25Function (sqlite.org/fts5.html, "The bm25() function"; summarised here from that source, which also
// clamps a non-positive idf to 1e-6):
//   score = sum over phrases i of idf_i * f_i * (k1 + 1) / (f_i + k1 * (1 - b + b * |d| / avgdl))
//   f_i   = sum over the phrase's instances in the row of the weight of the instance's column
//   idf_i = ln((N - n_i + 0.5) / (n_i + 0.5)), clamped to 1e-6 when <= 0;  k1 = 1.2, b = 0.75
// tests/retrieve/lexical-memory.test.ts checks ids and scores against FTS5, after random changes and merges too.
//
// Staying in step: the whole table is read once, at the first query (or start-up); after that the store's lexical
// change log (every chunk row inserted, deleted or moved, from any process) says which rows to read again, and
// only those are applied (lexical-state.ts: per-collection segments, a mutable segment, deletion markers,
// background merges). With a change thread (the service's: lexical-thread.ts), a short run of changes is read
// and tokenized on that thread and applied here in one synchronous step between queries; until then queries are
// answered by the index as it was (every change up to its position, none after: an earlier moment of the
// database, never half a change), for at most `maxLagMs`. Without one, a short gap is closed inside the query
// (one changed document costs milliseconds). A long run (a full re-index) is applied in the background in slices
// while FTS5 answers.

import type { FtsWeights, LexicalRowChange, Repository } from '../store/index.js';
import { buildLexicalIndex, NO_COLLECTION, splitByCollection } from './lexical-build.js';
import { createScorer } from './lexical-score.js';
import { finish } from './lexical-segment.js';
import { type LexicalDeltaInfo, LexicalState, type MergePlan } from './lexical-state.js';
import type { LexicalChangeReader } from './lexical-thread.js';
import type { PhraseCount } from './query-text.js';

/** What the in-memory index reads from the store: lexical snapshots, the change log and the tokenizer. */
export type LexicalSource = Pick<Repository, 'lexicalSnapshot' | 'lexicalHead' | 'lexicalChanges' | 'concurrentReads' | 'queryTokenizer'>;

export interface LexicalMemoryStats {
  ready: boolean;
  /** Loading or applying a long run of changes in the background. */
  building: boolean;
  rows: number;
  terms: number;
  postings: number;
  /** Bytes held by the segments' typed arrays (the term maps' strings and the mutable segment not counted). */
  arrayBytes: number;
  buildMs: number;
  /** Whole loads of the table (the first, and one after any failure to follow the log). */
  builds: number;
  segments: number;
  mutableRows: number;
  deletedRows: number;
  merges: number;
  /** Changed rows applied from the change log. */
  applied: number;
  /** The change log position the index holds. */
  head: number;
  /** Change log reads done on the change thread and applied here. */
  threadReads: number;
  /** Rows of the largest segment (at most maxSegmentRows). */
  largestSegmentRows: number;
}

export interface LexicalMemory {
  /**
   * The top `limit` chunks of `collection` for the weighted phrases, scored as FTS5's bm25() with the column
   * weights `w`, best first (ties by chunk id). `allowed` restricts to those chunk ids. Null when this index
   * cannot answer now: not loaded yet, a long run of changes still being applied, or a query word FTS5 splits
   * into several tokens (a phrase needs positions, which this index does not keep). The caller then asks FTS5.
   */
  search(collection: string, phrases: readonly PhraseCount[], limit: number, w: FtsWeights, allowed?: ReadonlySet<number>): { chunkId: number; score: number }[] | null;
  /** Starts bringing the index up to date without waiting: a short run of changes now, a long one in the background. */
  refresh(): void;
  /**
   * Null when `search` would not pass the query to FTS5 for want of an index, or when the work that keeps it from
   * answering began more than `maxWaitMs` ago; otherwise (a load or a long run of changes being applied in the
   * background) a promise that resolves when that work ends or `maxWaitMs` after it began, whichever comes first.
   * A query that waits on it leaves the event loop to that work instead of running FTS5 beside it.
   */
  waitForWork(): Promise<void> | null;
  /** Loads, or applies every logged change, now (synchronously), finishing any background work first. */
  syncNow(): void;
  /** Resolves once the index holds every change logged at call time (or later). */
  whenReady(): Promise<void>;
  stats(): LexicalMemoryStats;
  close(): void;
}

export interface LexicalMemoryOptions {
  /**
   * true: load and apply long runs of changes in slices from a concurrent read (a connection of its own), giving
   * the event loop a turn between slices, and merge segments in the background; queries are answered by FTS5
   * until the index holds every change. false: all of it inside the call that needs it. A store without
   * concurrent reads (in memory) loads synchronously.
   */
  background?: boolean;
  /** Least time before a failed load or catch-up is tried again (default 5 s); FTS5 answers meanwhile. */
  minRebuildGapMs?: number;
  /** Logged changes a query applies itself (or the change thread reads) at once; past this, in the background. */
  syncLimit?: number;
  /**
   * Reads short runs of changes on another thread (`background` only); the index then owns it and closes it.
   * Queries are answered by the index at its last position meanwhile.
   */
  changeReader?: LexicalChangeReader;
  /** Longest time queries are answered by an index behind the change log before FTS5 answers instead (1000 ms). */
  maxLagMs?: number;
  /** How long after background work begins `waitForWork` stops waiting for it and FTS5 answers instead (default: maxLagMs). */
  maxWaitMs?: number;
  /** Time one turn of the event loop gives background work before queries get a turn (default 8 ms). */
  sliceMs?: number;
  /** Most rows in one segment: the first load is cut into segments of this size and merges stop at it (16,384). */
  maxSegmentRows?: number;
  /** Rows the mutable segment of a collection takes before it becomes immutable (default 1024). */
  mutableRows?: number;
  /** Segments of one size tier merged into one (default 4). */
  mergeFactor?: number;
  onBuilt?: (info: { rows: number; terms: number; postings: number; ms: number }) => void;
  onError?: (err: unknown) => void;
}

/** The change log was pruned past the position the index holds: only a whole read can bring it up to date. */
class LogGap extends Error {
  constructor() {
    super('the lexical change log no longer reaches back to the in-memory index; reading the table again');
  }
}

interface Job {
  gen: Generator<void, void, void>;
  settled: boolean;
  done: Promise<void>;
  /** performance.now() when it began. */
  started: number;
  step(): void;
}

export function createLexicalMemory(store: LexicalSource, opts: LexicalMemoryOptions = {}): LexicalMemory {
  const background = (opts.background ?? false) && store.concurrentReads;
  const minGap = opts.minRebuildGapMs ?? 5000;
  const syncLimit = opts.syncLimit ?? 4096;
  const stateOpts = { mutableRows: opts.mutableRows ?? 1024, mergeFactor: Math.max(2, opts.mergeFactor ?? 4), maxSegmentRows: opts.maxSegmentRows ?? 16_384 };
  const reader = background ? (opts.changeReader ?? null) : null;
  if (!background) opts.changeReader?.close();
  const maxLagMs = opts.maxLagMs ?? 1000;
  const maxWaitMs = opts.maxWaitMs ?? maxLagMs;
  const sliceMs = opts.sliceMs ?? 8;
  const tokens = store.queryTokenizer();

  let state: LexicalState | null = null;
  /** N and the token total as FTS5's averages record has them at the state's log position. */
  let statRows = 0;
  let statTokens = 0;
  let job: Job | null = null;
  let merging = false;
  let lastFailure = -Infinity;
  let builds = 0;
  let buildMs = 0;
  let closed = false;
  /** A read on the change thread in flight, whether that thread failed (then changes are read here), and since when
   * queries have been answered by an index behind the log (-1: it was at the head when last looked at). */
  let reading: Promise<void> | null = null;
  let readerFailed = false;
  let behindSince = -1;
  let threadReads = 0;
  const scorer = createScorer();

  const fail = (err: unknown): void => {
    // A half-applied change cannot be trusted: drop the index; the next load reads the table again (at once when
    // the log was merely pruned past it, after the retry gap when something went wrong).
    state = null;
    if (!(err instanceof LogGap)) lastFailure = performance.now();
    opts.onError?.(err);
  };

  function* load(concurrent: boolean): Generator<void, void, void> {
    const t0 = performance.now();
    const data = yield* buildLexicalIndex(store.lexicalSnapshot({ concurrent }));
    const { segments, df } = yield* splitByCollection(data, stateOpts.maxSegmentRows);
    state = LexicalState.fromLoad(stateOpts, segments, df, data.head);
    statRows = data.nRow;
    statTokens = data.tokens;
    builds++;
    buildMs = performance.now() - t0;
    const st = state.stats();
    opts.onBuilt?.({ rows: state.live, terms: state.df.size, postings: st.postings, ms: buildMs });
  }

  /** Applies a delta to `s`, yielding every 64 rows (run to its end at once, it is one step between queries). */
  function* apply(s: LexicalState, delta: LexicalDeltaInfo, changes: Iterable<LexicalRowChange>): Generator<void, void, void> {
    if (!delta.complete) throw new LogGap();
    yield* s.applyDelta(delta, changes);
    statRows = delta.rows;
    statTokens = delta.tokens;
  }

  function* catchUp(concurrent: boolean): Generator<void, void, void> {
    const delta = store.lexicalChanges(state!.head, { concurrent });
    try {
      yield* apply(state!, delta, delta.changes());
    } finally {
      delta.release();
    }
  }

  /** Asks the change thread for the changes after the state's position; applies them in one step when they come. */
  const readChanges = (): void => {
    if (reading || !reader || readerFailed || closed || !state) return;
    const s = state;
    const since = s.head;
    reading = reader
      .read(since, syncLimit)
      .then(
        (set) => {
          // Overtaken (reloaded, or brought up to date here meanwhile) or too long: the next query decides again.
          if (closed || state !== s || s.head !== since || job || set === null) return;
          runNow(apply(s, set, set.changes));
          if (state !== s) return;
          behindSince = -1;
          threadReads++;
        },
        (err: unknown) => {
          readerFailed = true;
          opts.onError?.(err);
        },
      )
      .finally(() => {
        reading = null;
        // Changes written while this read was in flight: read them too.
        if (!closed && state && !job && state.head < store.lexicalHead()) readChanges();
      });
  };

  /** Runs `gen` in slices on the event loop; `syncNow` may finish it early. */
  const startJob = (gen: Generator<void, void, void>): Job => {
    let resolve!: () => void;
    const j: Job = {
      gen,
      settled: false,
      done: new Promise<void>((r) => (resolve = r)),
      started: performance.now(),
      step() {
        if (j.settled) return;
        try {
          if (closed || !j.gen.next().done) {
            if (closed) j.gen.return();
            else return;
          }
        } catch (err) {
          fail(err);
        }
        j.settled = true;
        if (job === j) job = null;
        resolve();
        scheduleMerge();
      },
    };
    // Steps (64 rows each) for up to sliceMs a turn: one step a turn would leave a long run starved behind the
    // queries, each of which FTS5 answers, slowly, until the run is applied.
    const tick = (): void => {
      const until = performance.now() + sliceMs;
      do j.step();
      while (!j.settled && performance.now() < until);
      if (!j.settled) setImmediate(tick);
    };
    setImmediate(tick);
    return (job = j);
  };

  const runNow = (gen: Generator<void, void, void>): void => {
    try {
      finish(gen);
    } catch (err) {
      fail(err);
    }
    scheduleMerge();
  };

  /** Merges while a plan is due: in the background one slice at a time, else at once. */
  const scheduleMerge = (): void => {
    if (merging || closed || !state) return;
    const s = state;
    const plan: MergePlan | null = s.planMerge();
    if (!plan) return;
    const gen = s.mergeBuild(plan);
    if (!background) {
      s.publishMerge(plan, finish(gen));
      scheduleMerge();
      return;
    }
    merging = true;
    const tick = (): void => {
      if (closed) return;
      try {
        const r = gen.next();
        if (!r.done) {
          setImmediate(tick);
          return;
        }
        if (state === s) s.publishMerge(plan, r.value);
      } catch (err) {
        opts.onError?.(err);
      }
      merging = false;
      scheduleMerge();
    };
    setImmediate(tick);
  };

  /**
   * The state that answers now: one holding every logged change, or (with a change thread, `sync` false) one behind
   * by a short run of changes being read there, for at most `maxLagMs`; otherwise null, after starting (or doing)
   * the work.
   */
  const usable = (sync = false): LexicalState | null => {
    if (job || closed) return null;
    if (!state) {
      if (performance.now() - lastFailure < minGap) return null;
      if (background) startJob(load(true));
      else runNow(load(false));
      if (!state) return null;
    }
    const head = store.lexicalHead();
    if (state.head === head) {
      behindSince = -1;
      return state;
    }
    if (background && head - state.head > syncLimit) {
      startJob(catchUp(true));
      return null;
    }
    if (reader && !readerFailed && !sync) {
      const now = performance.now();
      if (behindSince < 0) behindSince = now;
      readChanges();
      return now - behindSince <= maxLagMs ? state : null;
    }
    runNow(catchUp(false));
    if (!state && !background && performance.now() - lastFailure >= minGap) runNow(load(false));
    return state && state.head >= head ? state : null;
  };

  /** Finishes background work now. */
  const drain = (): void => {
    for (let j = job; j; j = job) while (!j.settled) j.step();
  };

  return {
    search(collection, phrases, limit, w, allowed) {
      if (closed || limit <= 0) return limit <= 0 ? [] : null;
      const s = usable();
      if (!s) return null;
      const col = s.collections.get(collection);
      if (col === undefined || collection === NO_COLLECTION) return [];
      // Tokenize as FTS5 would; a word that is several tokens makes a phrase, which needs positions.
      const looked = tokens(phrases.map((p) => p.term));
      if (looked.some((t) => t.length > 1)) return null;
      return scorer.score(s, col, { rows: statRows, tokens: statTokens }, phrases.map((p, i) => ({ term: looked[i]![0], count: p.count })), limit, w, allowed);
    },
    refresh() {
      usable();
    },
    waitForWork() {
      if (closed) return null;
      if (!job) usable();
      const j = job;
      if (!j) return null;
      // Bounded from the work's start, not from each query's: past it, queries go to FTS5 at once (a very long run).
      const left = maxWaitMs - (performance.now() - j.started);
      if (left <= 0) return null;
      let timer: NodeJS.Timeout | undefined;
      const waited = new Promise<void>((resolve) => (timer = setTimeout(resolve, left)));
      return Promise.race([j.done, waited]).finally(() => clearTimeout(timer));
    },
    syncNow() {
      if (closed) return;
      drain();
      usable(true);
      drain();
    },
    async whenReady() {
      const target = store.lexicalHead();
      for (;;) {
        if (closed) return;
        if (job || reading) {
          await (job ? job.done : reading);
          if (!state) return; // the work failed (reported through onError)
          continue;
        }
        const s = usable();
        if (s && s.head >= target) return;
        if (!job && !reading) return;
      }
    },
    stats() {
      const s = state;
      const st = s?.stats() ?? { segments: 0, mutableRows: 0, postings: 0, deletedRows: 0 };
      let rowsHeld = 0;
      let largest = 0;
      for (const col of s?.collections.values() ?? []) for (const ref of col.segments) (rowsHeld += ref.seg.ids.length), (largest = Math.max(largest, ref.seg.ids.length));
      return {
        ready: s !== null,
        building: job !== null,
        rows: s?.live ?? 0,
        terms: s?.df.size ?? 0,
        postings: st.postings,
        arrayBytes: st.postings * (4 + 2 + 2 + 2 + 4) + rowsHeld * (8 + 4 + 4 + 1) + scorer.scratchBytes(),
        buildMs,
        builds,
        segments: st.segments,
        mutableRows: st.mutableRows,
        deletedRows: st.deletedRows,
        merges: s?.merges ?? 0,
        applied: s?.applied ?? 0,
        head: s?.head ?? 0,
        threadReads,
        largestSegmentRows: largest,
      };
    },
    close() {
      closed = true;
      state = null;
      reader?.close();
      tokens.close();
    },
  };
}
