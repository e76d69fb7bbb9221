import { describe, expect, it } from 'vitest';
import { LexicalState } from '../../src/retrieve/lexical-state.js';
import type { LexicalRowChange } from '../../src/store/index.js';
import { mulberry32 } from '../fixtures/random.js';

// A long run of changes (a large document's chunks, written by one job) is applied to the in-memory lexical
// index in one step between queries. Its rows go through the mutable segment, whose per-row term maps cost about
// 20 KiB a row of 120 words: they must turn into immutable segments as the run goes, never pile up for the whole
// run (5,296 chunks of one upload held 110 MiB of the request thread's heap at once before this).

const fields = ['title', 'heading', 'body'] as const;

function rows(n: number, seed: number): LexicalRowChange[] {
  const rand = mulberry32(seed);
  return Array.from({ length: n }, (_, i) => {
    const postings = Array.from({ length: 5 + Math.floor(rand() * 20) }, () => [`w${Math.floor(rand() * 50)}`, fields[Math.floor(rand() * 3)]!] as [string, 'title' | 'heading' | 'body']);
    return { rowId: i + 1, row: { collection: i % 3 === 0 ? 'a' : 'b', length: postings.length, postings } };
  });
}

describe('a long run of lexical changes', () => {
  it('turns full mutable segments into segments while it is applied, and ends with the same statistics and document frequencies', () => {
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
    expect(most).toBeLessThanOrEqual(opts.mutableRows);
    expect(state.live).toBe(100);
    expect(state.tokens).toBe(tokens);
    expect(state.head).toBe(100);
    // Rows of collection a: 34 = 4 full segments of 8 + 2 left in the mutable segment; b: 66 = 8 × 8 + 2.
    expect(state.collections.get('a')!.segments.map((r) => r.seg.ids.length)).toEqual([8, 8, 8, 8]);
    expect(state.collections.get('a')!.mutable.length).toBe(2);
    expect(state.collections.get('b')!.mutable.length).toBe(2);
    // Document frequency counted once per row holding the term, wherever the row ended up.
    const df = new Map<string, number>();
    for (const c of changes) for (const t of new Set(c.row!.postings.map(([term]) => term))) df.set(t, (df.get(t) ?? 0) + 1);
    expect(new Map(state.df)).toEqual(df);
    for (const c of changes) expect(state.locate(c.rowId)).toBeDefined();
  });
});
