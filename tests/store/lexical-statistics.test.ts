import { mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import fc from 'fast-check';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { createLexicalMemory, type LexicalMemory } from '../../src/retrieve/lexical-memory.js';
import { phraseCounts, toWeightedMatch, type WeightedTerm } from '../../src/retrieve/query-text.js';
import type { Runtime } from '../../src/runtime.js';
import type { FtsWeights } from '../../src/store/index.js';
import { rawDb, tempRuntime } from '../fixtures/runtime.js';
import { mulberry32 } from '../fixtures/random.js';

// The lexical index must rank from the true statistics of the rows it holds, whatever sequence of adds, updates,
// deletes and re-indexes brought it there. BM25 as Robertson and Zaragoza (2009, "The Probabilistic Relevance
// Framework: BM25 and Beyond", eq. 3.15 with the idf of eq. 3.3) and as FTS5's bm25() documents it
// (sqlite.org/fts5.html, "The bm25() function") reads two collection statistics besides the postings: N, the number
// of rows, and avgdl, the mean row length in tokens. Both engines (FTS5's bm25() and the in-memory copy) must
// therefore give a mutated store exactly the rankings and scores (1e-9 relative) of a fresh ingest of the same
// final documents. Chunk ids differ between two stores, so hits are compared by (source, ordinal).

// Words of the invented Marrowgate Valley Transit scenario.
const WORDS = ['tram', 'trams', 'ferry', 'ferries', 'depot', 'depots', 'refund', 'refunds', 'refunded', 'ticket', 'tickets', 'timetable', 'harbour',
  'platform', 'platforms', 'driver', 'drivers', 'rota', 'shift', 'shifts', 'night', 'weekend', 'fare', 'fares', 'zone', 'zones', 'pass', 'passes',
  'bicycle', 'ramp', 'lost', 'property', 'report', 'fault', 'route', 'connection', 'connecting', 'Quarrel', 'Lane', 'Tollbridge', 'Yard', 'café',
  'the', 'and', 'of', 'to', 'a', 'in', 'for', 'on', 'is', 'with'];

function notice(rand: () => number, i: number): string {
  const word = (): string => WORDS[Math.floor(Math.pow(rand(), 1.4) * WORDS.length)]!;
  const words = (n: number): string => Array.from({ length: n }, word).join(' ');
  const sections = Array.from({ length: 1 + Math.floor(rand() * 3) }, (_, s) => {
    const paras = Array.from({ length: 1 + Math.floor(rand() * 3) }, () => `${words(8 + Math.floor(rand() * 60))}.`);
    return `## ${words(2)} ${s + 1}\n\n${paras.join('\n\n')}`;
  });
  return `# Depot notice ${i}: ${words(2)}\n\n${sections.join('\n\n')}\n`;
}

function randomQuery(rand: () => number): WeightedTerm[] {
  const out = new Map<string, number>();
  for (let n = 1 + Math.floor(rand() * 6); n > 0; n--) out.set(WORDS[Math.floor(rand() * WORDS.length)]!.toLowerCase(), 0.1 + rand());
  return [...out].map(([term, weight]) => ({ term, weight }));
}

type KeyedHit = { key: string; score: number };

/** A chunk's identity across two stores: its document's source and its place in the document. */
function chunkKeys(rt: Runtime): Map<number, string> {
  const rows = rawDb(rt).prepare('SELECT k.id, d.source, k.ordinal FROM chunks k JOIN documents d ON d.id = k.document_id').raw().all() as [number, string, number][];
  return new Map(rows.map(([id, source, ordinal]) => [id, `${source}#${ordinal}`]));
}

/** Same ranking: equal scores (1e-9 relative) rank by rank, and the same chunks within each group of tied scores. */
function expectSameRanking(got: readonly KeyedHit[], want: readonly KeyedHit[], limit: number, what: string): void {
  expect(got.length, `${what}: number of hits`).toBe(want.length);
  for (let i = 0; i < want.length; i++) {
    const rel = Math.abs(got[i]!.score - want[i]!.score) / Math.max(1e-300, Math.abs(want[i]!.score));
    expect(rel, `${what}: score at rank ${i + 1} (${got[i]!.score} vs ${want[i]!.score})`).toBeLessThan(1e-9);
  }
  const groups = (hits: readonly KeyedHit[]): string[][] => {
    const out: string[][] = [];
    hits.forEach((h, i) => {
      if (i > 0 && Math.abs(h.score - hits[i - 1]!.score) <= 1e-12 * Math.abs(h.score)) out[out.length - 1]!.push(h.key);
      else out.push([h.key]);
    });
    return out.map((g) => g.sort());
  };
  const gg = groups(got);
  const wg = groups(want);
  expect(gg.length, `${what}: groups of tied scores`).toBe(wg.length);
  // A tie cut by the limit may hold different members on each side: only its size is compared.
  for (let i = 0; i < wg.length; i++) {
    if (want.length === limit && i === wg.length - 1) expect(gg[i]!.length, what).toBe(wg[i]!.length);
    else expect(gg[i], `${what}: chunks tied at rank group ${i + 1}`).toEqual(wg[i]);
  }
}

const WEIGHTS: FtsWeights = { title: 2, heading: 1, body: 1 };

/** Every query ranked by both engines on one store, hits named by chunk key. */
function rankAll(rt: Runtime, collection: string, queries: readonly WeightedTerm[][], limit: number): { fts5: KeyedHit[][]; memory: KeyedHit[][] } {
  const keys = chunkKeys(rt);
  const named = (hits: readonly { chunkId: number; score: number }[]): KeyedHit[] => hits.map((h) => ({ key: keys.get(h.chunkId)!, score: h.score }));
  const mem = createLexicalMemory(rt.repo);
  try {
    const fts5 = queries.map((q) => named(rt.repo.searchFts(collection, toWeightedMatch(q, { maxRepeat: 6 })!, limit, WEIGHTS)));
    const memory = queries.map((q) => {
      const hits = mem.search(collection, phraseCounts(q, { maxRepeat: 6 }), limit, WEIGHTS);
      expect(hits, 'the in-memory engine answers').not.toBeNull();
      return named(hits!);
    });
    return { fts5, memory };
  } finally {
    mem.close();
  }
}

/** The statistics BM25 reads (as the store reports them to both engines) and the true ones of the rows present. */
function statistics(rt: Runtime): { rows: number; tokens: number; trueRows: number; trueTokens: number } {
  const snap = rt.repo.lexicalSnapshot();
  try {
    let trueTokens = 0;
    for (const [, n] of snap.rowLengths()) trueTokens += n;
    const trueRows = (rawDb(rt).prepare("SELECT count(*) FROM chunks k JOIN documents d ON d.id = k.document_id WHERE substr(d.collection, 1, 9) <> '~rebuild:'").pluck().get() as number);
    return { rows: snap.rows, tokens: snap.tokens, trueRows, trueTokens };
  } finally {
    snap.release();
  }
}

let work: string;
let docs: string;
const cleanups: (() => void)[] = [];

beforeEach(() => {
  work = mkdtempSync(path.join(tmpdir(), 'sb-lexstats-'));
  docs = path.join(work, 'docs');
  mkdirSync(docs);
});
afterEach(() => {
  for (const c of cleanups.splice(0)) c();
  rmSync(work, { recursive: true, force: true });
});

async function runtime(): Promise<Runtime> {
  const t = await tempRuntime({ retrieval: { lexicalEngine: 'fts5' } });
  cleanups.push(t.cleanup);
  return t.rt;
}

/** A fresh store holding only the folder as it is now. */
async function freshIngest(): Promise<Runtime> {
  const rt = await runtime();
  await rt.ingestor.ingestPath(docs, { collection: 'c' });
  return rt;
}

describe('lexical statistics after changes in place', () => {
  it('count each present row once after updates, deletions and full re-indexes', async () => {
    const rand = mulberry32(17);
    for (let i = 0; i < 40; i++) writeFileSync(path.join(docs, `notice-${i}.md`), notice(rand, i));
    const rt = await runtime();
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const first = statistics(rt);
    expect(first.rows).toBe(first.trueRows);
    expect(first.tokens).toBe(first.trueTokens);
    // Edit a quarter of the notices, delete a tenth, re-index incrementally, then fully, twice.
    for (let i = 0; i < 40; i += 4) writeFileSync(path.join(docs, `notice-${i}.md`), notice(rand, i));
    for (let i = 1; i < 40; i += 10) rmSync(path.join(docs, `notice-${i}.md`));
    await rt.ingestor.reindex({ collection: 'c' });
    await rt.ingestor.reindex({ collection: 'c', full: true });
    await rt.ingestor.reindex({ collection: 'c', full: true });
    const after = statistics(rt);
    expect(after.rows, 'rows counted by the statistics BM25 reads').toBe(after.trueRows);
    expect(after.tokens, 'tokens counted by the statistics BM25 reads').toBe(after.trueTokens);
    const fresh = statistics(await freshIngest());
    expect(after).toEqual(fresh);
  });

  it('rank as a fresh ingest of the final documents after a random sequence of adds, updates, deletes and re-indexes, in both engines', async () => {
    const rand = mulberry32(2026);
    let next = 0;
    const add = (): void => {
      writeFileSync(path.join(docs, `notice-${next}.md`), notice(rand, next));
      next++;
    };
    for (let i = 0; i < 30; i++) add();
    const rt = await runtime();
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const ops: string[] = [];
    for (let step = 0; step < 30; step++) {
      const present = readdirSync(docs).sort();
      const pick = (): string => present[Math.floor(rand() * present.length)]!;
      const r = rand();
      if (r < 0.3 || present.length < 5) {
        add();
        ops.push('add');
      } else if (r < 0.6) {
        const f = pick();
        writeFileSync(path.join(docs, f), notice(rand, Number(/\d+/.exec(f)![0])));
        ops.push('update');
      } else {
        rmSync(path.join(docs, pick()));
        ops.push('delete');
      }
      // Changes land through incremental re-indexes, now and then a full one, and sometimes pile up first.
      const how = rand();
      if (how < 0.15) {
        await rt.ingestor.reindex({ collection: 'c', full: true });
        ops.push('full');
      } else if (how < 0.75) {
        await rt.ingestor.reindex({ collection: 'c' });
        ops.push('reindex');
      }
    }
    await rt.ingestor.reindex({ collection: 'c', full: true });
    ops.push('full');
    // The sequence did exercise every kind of change.
    for (const op of ['add', 'update', 'delete', 'reindex', 'full']) expect(ops, op).toContain(op);

    const fresh = await freshIngest();
    expect(statistics(rt)).toEqual(statistics(fresh));
    const qrand = mulberry32(7);
    const queries = Array.from({ length: 40 }, () => randomQuery(qrand));
    for (const limit of [10, 1000]) {
      const got = rankAll(rt, 'c', queries, limit);
      const want = rankAll(fresh, 'c', queries, limit);
      queries.forEach((q, i) => {
        const what = `query ${JSON.stringify(q.map((t) => t.term))}, limit ${limit}`;
        expectSameRanking(got.fts5[i]!, want.fts5[i]!, limit, `fts5 ${what}`);
        expectSameRanking(got.memory[i]!, want.memory[i]!, limit, `memory ${what}`);
        // And the two engines agree with each other on the mutated store.
        expectSameRanking(got.memory[i]!, got.fts5[i]!, limit, `memory against fts5, ${what}`);
      });
      expect(want.fts5.some((h) => h.length > 0)).toBe(true);
    }
  });

  it('rank alike in an in-memory index kept through a random sequence of adds, updates, renames, deletes, incremental and full re-indexes and merges, in two collections', async () => {
    // One index follows the store from the start, by its change log alone: tiny mutable segments and pairwise
    // merges so that a short sequence turns rows into segments and merges them many times over.
    type Op = { kind: 'add' | 'update' | 'rename' | 'delete' | 'reindex' | 'full'; col: 0 | 1; pick: number; seed: number };
    const opArb: fc.Arbitrary<Op> = fc.record({
      kind: fc.constantFrom<Op['kind']>('add', 'add', 'update', 'rename', 'delete', 'reindex', 'reindex', 'full'),
      col: fc.constantFrom<0 | 1>(0, 1),
      pick: fc.nat(1000),
      seed: fc.nat(),
    });
    const names = ['c', 'd'] as const;
    const seen = { merges: 0, kinds: new Set<string>() };
    await fc.assert(
      fc.asyncProperty(fc.array(opArb, { minLength: 12, maxLength: 24 }), async (ops) => {
        const folders = names.map((n) => {
          const dir = path.join(work, `run-${Math.random().toString(36).slice(2)}`, n);
          mkdirSync(dir, { recursive: true });
          return dir;
        });
        let next = 0;
        const write = (col: number, seed: number, name = `notice-${next++}.md`): void => writeFileSync(path.join(folders[col]!, name), notice(mulberry32(seed), seed % 100));
        for (let i = 0; i < 6; i++) write(i % 2, 1000 + i);
        const rt = await runtime();
        for (const c of [0, 1]) await rt.ingestor.ingestPath(folders[c]!, { collection: names[c]! });
        const mem: LexicalMemory = createLexicalMemory(rt.repo, { mutableRows: 3, mergeFactor: 2, maxSegmentRows: 8 });
        try {
          const queries = Array.from({ length: 8 }, (_, i) => randomQuery(mulberry32(i + 1)));
          const check = (what: string): void => {
            const keys = chunkKeys(rt);
            for (const c of names) {
              for (const q of queries) {
                const want = rt.repo.searchFts(c, toWeightedMatch(q, { maxRepeat: 6 })!, 50, WEIGHTS).map((h) => ({ key: keys.get(h.chunkId)!, score: h.score }));
                const hits = mem.search(c, phraseCounts(q, { maxRepeat: 6 }), 50, WEIGHTS);
                expect(hits, `${what}: the in-memory index answers`).not.toBeNull();
                expectSameRanking(hits!.map((h) => ({ key: keys.get(h.chunkId)!, score: h.score })), want, 50, `${what}, ${c}, ${JSON.stringify(q.map((t) => t.term))}`);
              }
            }
          };
          check('after the first ingest');
          for (const [i, op] of ops.entries()) {
            const folder = folders[op.col]!;
            const present = readdirSync(folder).sort();
            const target = present[op.pick % Math.max(1, present.length)];
            if (op.kind === 'add' || !target) write(op.col, op.seed);
            else if (op.kind === 'update') write(op.col, op.seed, target);
            else if (op.kind === 'rename') writeFileSync(path.join(folder, `renamed-${next++}.md`), readFileSync(path.join(folder, target))), rmSync(path.join(folder, target));
            else if (op.kind === 'delete') rmSync(path.join(folder, target));
            else await rt.ingestor.reindex({ collection: names[op.col]!, full: op.kind === 'full' });
            seen.kinds.add(op.kind);
            if (op.kind === 'reindex' || op.kind === 'full') check(`step ${i + 1} (${op.kind})`);
          }
          for (const c of [0, 1]) await rt.ingestor.reindex({ collection: names[c]! });
          check('at the end');
          expect(mem.stats().builds, 'loaded once, then only changes applied').toBe(1);
          seen.merges += mem.stats().merges;
          // And as a fresh ingest of the final folders, read whole by a new index.
          const fresh = await runtime();
          for (const c of [0, 1]) await fresh.ingestor.ingestPath(folders[c]!, { collection: names[c]! });
          for (const c of names) {
            const got = rankAll(rt, c, queries, 1000);
            const want = rankAll(fresh, c, queries, 1000);
            const keys = chunkKeys(rt);
            queries.forEach((q, i) => {
              const hits = mem.search(c, phraseCounts(q, { maxRepeat: 6 }), 1000, WEIGHTS)!.map((h) => ({ key: keys.get(h.chunkId)!, score: h.score }));
              expectSameRanking(hits, want.memory[i]!, 1000, `kept index against a fresh ingest, ${c}, query ${i}`);
              expectSameRanking(got.memory[i]!, want.memory[i]!, 1000, `reloaded index against a fresh ingest, ${c}, query ${i}`);
            });
          }
        } finally {
          mem.close();
        }
      }),
      { seed: 2026, numRuns: 5 },
    );
    expect(seen.merges, 'segments were merged along the way').toBeGreaterThan(0);
    for (const kind of ['add', 'update', 'rename', 'delete', 'reindex', 'full']) expect([...seen.kinds], kind).toContain(kind);
  });
});
