import { describe, expect, it } from 'vitest';
import { createScorer } from '../../src/retrieve/lexical-score.js';
import { LexicalState } from '../../src/retrieve/lexical-state.js';
import type { LexicalRowChange } from '../../src/store/index.js';
import { mulberry32 } from '../fixtures/random.js';

// A long run of changes (a large document's chunks, written by one job) is applied to the in-memory lexical
// index while queries are answered without it. Through the mutable segment, whose per-row term maps cost about
// 10-20 KiB a row of 120 words, the rows would pile up (5,296 chunks of one upload once held 110 MiB of the request
// thread's heap at once) or, flushed as they come, be promoted to V8's old generation as garbage: a run of at least
// `mutableRows` rows goes into segments straight from flat arrays, `mutableRows × mergeFactor` rows at a time.

const fields = ['title', 'heading', 'body'] as const;

function rows(n: number, seed: number): LexicalRowChange[] {
  const rand = mulberry32(seed);
  return Array.from({ length: n }, (_, i) => {
    const postings = Array.from({ length: 5 + Math.floor(rand() * 20) }, () => [`w${Math.floor(rand() * 50)}`, fields[Math.floor(rand() * 3)]!] as [string, 'title' | 'heading' | 'body']);
    return { rowId: i + 1, row: { collection: i % 3 === 0 ? 'a' : 'b', length: postings.length, postings } };
  });
}

describe('a long run of lexical changes', () => {
  it('turns into segments while it is applied, never through the mutable segment, and ends with the same statistics and document frequencies', () => {
    const opts = { mutableRows: 8, mergeFactor: 4, maxSegmentRows: 1000 };
    const changes = rows(100, 11);
    const tokens = changes.reduce((t, c) => t + c.row!.length, 0);
    const state = new LexicalState(opts);
    let most = 0;
    // Watches the mutable segments between rows, as the run is read.
    function* watched(): Generator<LexicalRowChange> {
      for (const c of changes) {
        for (const col of state.collections.values()) most = Math.max(most, col.mutable.length);
        yield c;
      }
    }
    const run = state.applyDelta({ head: 100, complete: true, rows: 100, tokens, count: 100 }, watched());
    while (!run.next().done) {
      /* each yield is one step between queries */
    }
    expect(most).toBe(0);
    expect(state.live).toBe(100);
    expect(state.tokens).toBe(tokens);
    expect(state.head).toBe(100);
    // Rows of collection a: 34 = a segment of 8 × 4 + the 2 left at the end; b: 66 = 2 × 32 + 2.
    expect(state.collections.get('a')!.segments.map((r) => r.seg.ids.length)).toEqual([32, 2]);
    expect(state.collections.get('b')!.segments.map((r) => r.seg.ids.length)).toEqual([32, 32, 2]);
    expect(state.collections.get('a')!.mutable.length).toBe(0);
    expect(state.collections.get('b')!.mutable.length).toBe(0);
    // Document frequency counted once per row holding the term, wherever the row ended up.
    const df = new Map<string, number>();
    for (const c of changes) for (const t of new Set(c.row!.postings.map(([term]) => term))) df.set(t, (df.get(t) ?? 0) + 1);
    expect(new Map(state.df)).toEqual(df);
    for (const c of changes) expect(state.locate(c.rowId)).toBeDefined();
  });
});

describe('a long run of lexical changes against the same rows applied a few at a time', () => {
  it('gives the same statistics, document frequencies, locations and scores', () => {
    const opts = { mutableRows: 128, mergeFactor: 4, maxSegmentRows: 16_384 };
    const changes = rows(1000, 23);
    const tokens = changes.reduce((t, c) => t + c.row!.length, 0);
    const long = new LexicalState(opts);
    const run = long.applyDelta({ head: 1000, complete: true, rows: 1000, tokens, count: 1000 }, changes);
    let yields = 0;
    while (!run.next().done) yields++;
    expect(yields).toBeGreaterThan(10);
    // b: 666 rows = 512 (128 × 4) + 154; a: 334.
    expect(long.collections.get('b')!.segments.map((r) => r.seg.ids.length)).toEqual([512, 154]);
    expect(long.collections.get('a')!.segments.map((r) => r.seg.ids.length)).toEqual([334]);
    // The same rows ten at a time: short runs, through the mutable segment (flushed every 128 rows).
    const few = new LexicalState(opts);
    for (let at = 0; at < changes.length; at += 10) {
      const upTo = changes.slice(0, at + 10).reduce((t, c) => t + c.row!.length, 0);
      const step = few.applyDelta({ head: at + 10, complete: true, rows: at + 10, tokens: upTo, count: 10 }, changes.slice(at, at + 10));
      while (!step.next().done) {
        /* a run of ten does not yield */
      }
    }
    expect(few.collections.get('b')!.mutable.length).toBeGreaterThan(0);
    expect(long.live).toBe(few.live);
    expect(long.tokens).toBe(few.tokens);
    expect(new Map(long.df)).toEqual(new Map(few.df));
    for (const c of changes) expect(long.locate(c.rowId)?.col.name).toBe(c.row!.collection);
    const scorer = createScorer();
    const w = { title: 10, heading: 5, body: 1 };
    const stat = { rows: 1000, tokens };
    for (const terms of [['w1'], ['w2', 'w7'], ['w0', 'w13', 'w49'], ['w5', 'w5', 'w30']]) {
      const phrases = terms.map((term) => ({ term, count: 1 }));
      for (const name of ['a', 'b']) {
        const got = scorer.score(long, long.collections.get(name)!, stat, phrases, 20, w);
        const want = scorer.score(few, few.collections.get(name)!, stat, phrases, 20, w);
        expect(got.length).toBeGreaterThan(0);
        expect(got.map((h) => h.chunkId)).toEqual(want.map((h) => h.chunkId));
        got.forEach((h, k) => expect(h.score).toBeCloseTo(want[k]!.score, 9));
      }
    }
    // A row of the long run removed afterwards leaves the frequencies as if it had never come.
    const gone = changes[5]!;
    long.remove(gone.rowId);
    few.remove(gone.rowId);
    expect(new Map(long.df)).toEqual(new Map(few.df));
  });
});
