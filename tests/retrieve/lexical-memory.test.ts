import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { Embedder } from '../../src/embed/types.js';
import { createLexicalMemory, type LexicalMemory } from '../../src/retrieve/lexical-memory.js';
import { createLexicalChangeThread, type LexicalChangeReader } from '../../src/retrieve/lexical-thread.js';
import { phraseCounts, toWeightedMatch, type WeightedTerm } from '../../src/retrieve/query-text.js';
import { DEFAULT_RM3 } from '../../src/retrieve/rm3.js';
import { createRetriever, retrieverOptions } from '../../src/retrieve/retriever.js';
import { createDocumentApi } from '../../src/runtime.js';
import { openStore, type FtsWeights, type Repository, type SqliteStore, type VectorIndexes } from '../../src/store/index.js';
import { sqliteLexical } from '../../src/store/sqlite/lexical.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { mulberry32 } from '../fixtures/random.js';
import { waitFor, withDeadline } from '../fixtures/wait.js';

// The in-memory index must rank exactly as the FTS5 path: the reference is SQLite's own FTS5 bm25() through
// repo.searchFts (itself checked against Robertson and Zaragoza's BM25 in tests/store/bm25.test.ts). Every
// comparison asks for the same chunks in the same order, and scores equal within 1e-9 relative.

type Hit = { chunkId: number; score: number };

/** Same ranking: equal scores (1e-9 relative) position by position, and the same ids once ties are sorted. */
function expectSameRanking(got: readonly Hit[] | null, want: readonly Hit[], limit: number): void {
  expect(got).not.toBeNull();
  const g = got!;
  expect(g.length).toBe(want.length);
  for (let i = 0; i < want.length; i++) {
    const rel = Math.abs(g[i]!.score - want[i]!.score) / Math.max(1e-300, Math.abs(want[i]!.score));
    expect(rel, `score at rank ${i + 1}`).toBeLessThan(1e-9);
  }
  // Equal scores may come in any order from FTS5: compare ids per group of tied scores. A group cut by the
  // limit may hold different members of the tie, so only its size is compared.
  const groups = (hits: readonly Hit[]): number[][] => {
    const out: number[][] = [];
    hits.forEach((h, i) => {
      if (i > 0 && Math.abs(h.score - hits[i - 1]!.score) <= 1e-12 * Math.abs(h.score)) out[out.length - 1]!.push(h.chunkId);
      else out.push([h.chunkId]);
    });
    return out.map((x) => x.sort((a, b) => a - b));
  };
  const gg = groups(g);
  const wg = groups(want);
  expect(gg.length).toBe(wg.length);
  const cut = want.length === limit;
  for (let i = 0; i < wg.length; i++) {
    if (cut && i === wg.length - 1) expect(gg[i]!.length).toBe(wg[i]!.length);
    else expect(gg[i]).toEqual(wg[i]);
  }
}

// Words of the invented tram-and-ferry operator scenario, with inflections the porter stemmer folds together,
// accents the tokenizer strips, digits and capitals.
const STEMS = ['connect', 'connected', 'connecting', 'connection', 'connections', 'run', 'running', 'runner', 'ran', 'ticket', 'tickets', 'ticketing',
  'refund', 'refunds', 'refunded', 'depot', 'depots', 'fare', 'fares', 'timetable', 'timetables', 'ferry', 'ferries', 'harbour', 'Harbour', 'café', 'cafe',
  'naïve', 'résumé', 'resume', 'shift', 'shifts', 'rota', 'rostering', 'generalization', 'generalise', 'relational', 'conditional', 'hopefulness', 'sensitivity',
  'probate', 'controlling', 'agreed', 'happy', 'sky', '2026', '24h', 'B12', 'zone', 'zones', 'pass', 'passes', 'passing', 'night', 'nightly', 'weekend',
  'the', 'and', 'of', 'to', 'a', 'in', 'for', 'on', 'is', 'with'];

function addDoc(repo: Repository, collection: string, id: string, title: string, chunks: { heading: string[]; text: string }[], metadata: Record<string, string> = {}): void {
  let offset = 0;
  repo.replaceDocument(
    { id, collection, source: `${id}.txt`, root: null, title, format: 'text', contentHash: id, byteSize: 1, pageCount: null, effectiveDate: null, metadata, text: chunks.map((c) => c.text).join('\n\n'), settingsKey: 's' },
    chunks.map((c, i) => {
      const start = offset;
      offset += c.text.length + 2;
      return { ordinal: i, text: c.text, start, end: start + c.text.length, headingPath: c.heading, pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: `${id}-${i}` };
    }),
    new Map(),
    'm',
  );
}

function generate(repo: Repository, seed: number, docs: number): void {
  const rand = mulberry32(seed);
  const word = (): string => STEMS[Math.floor(Math.pow(rand(), 1.6) * STEMS.length)]!;
  const words = (n: number): string => Array.from({ length: n }, word).join(' ');
  repo.transaction(() => {
    for (let d = 0; d < docs; d++) {
      const collection = d % 3 === 2 ? 'ferries' : 'trams';
      const title = words(1 + Math.floor(rand() * 3));
      const chunks = Array.from({ length: 1 + Math.floor(rand() * 4) }, () => {
        const heading = rand() < 0.5 ? [title, words(2)] : [title];
        const body = words(5 + Math.floor(rand() * 40));
        return { heading, text: rand() < 0.5 ? `${heading[heading.length - 1]}\n${body}` : body };
      });
      addDoc(repo, collection, `d${d}`, title, chunks, { group: String(d % 5) });
    }
  });
}

function randomQuery(rand: () => number): WeightedTerm[] {
  const n = 1 + Math.floor(rand() * 8);
  const out = new Map<string, number>();
  for (let i = 0; i < n; i++) out.set(STEMS[Math.floor(rand() * STEMS.length)]!.toLowerCase(), 0.05 + rand());
  return [...out].map(([term, weight]) => ({ term, weight }));
}

const WEIGHTS: FtsWeights[] = [
  { title: 2, heading: 1, body: 1 },
  { title: 1, heading: 1, body: 1 },
  { title: 3.3, heading: 0.25, body: 1.7 },
  { title: 0, heading: 0, body: 1 },
];

describe('phrase counts', () => {
  it('are the repeats toWeightedMatch writes into the FTS5 expression', () => {
    const rand = mulberry32(5);
    for (let i = 0; i < 200; i++) {
      const terms = randomQuery(rand);
      const maxRepeat = 1 + Math.floor(rand() * 18);
      const match = toWeightedMatch(terms, { maxRepeat })!;
      const written = new Map<string, number>();
      for (const part of match.split(' OR ')) written.set(part.slice(1, -1), (written.get(part.slice(1, -1)) ?? 0) + 1);
      expect(new Map(phraseCounts(terms, { maxRepeat }).map((p) => [p.term, p.count]))).toEqual(written);
    }
  });
});

describe('in-memory BM25 index against FTS5', () => {
  let repo: SqliteStore;
  let mem: LexicalMemory;

  beforeEach(() => {
    repo = openStore(':memory:');
    for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
    mem = createLexicalMemory(repo);
  });
  afterEach(() => {
    mem.close();
    repo.close();
  });

  const compare = (collection: string, terms: WeightedTerm[], maxRepeat: number, limit: number, w: FtsWeights, filter?: { documentIds?: string[]; metadata?: Record<string, string> }): void => {
    const match = toWeightedMatch(terms, { maxRepeat });
    const want = match ? repo.searchFts(collection, match, limit, w, filter) : [];
    const allowed = filter ? repo.chunkIdsMatching(collection, filter) : undefined;
    expectSameRanking(mem.search(collection, phraseCounts(terms, { maxRepeat }), limit, w, allowed), want, limit);
  };

  it('ranks a small fixture as FTS5 does: title, heading and body columns, weights, stemming, accents', () => {
    addDoc(repo, 'trams', 'refunds', 'Delay refunds', [
      { heading: ['Delay refunds', 'How to claim'], text: 'How to claim\nClaim a refund within 28 days of the delayed tram.' },
      { heading: ['Delay refunds', 'Night trams'], text: 'Refunds are not paid for night trams running after 01:00.' },
    ]);
    addDoc(repo, 'trams', 'cafe', 'Depot café', [{ heading: ['Depot café'], text: 'The café at the depot opens before the first shift.' }]);
    addDoc(repo, 'trams', 'passes', 'Annual passes', [{ heading: ['Annual passes'], text: 'Annual passes are refunded pro rata. A refunded pass cannot be reused.' }]);
    addDoc(repo, 'ferries', 'harbour', 'Harbour ferries', [{ heading: ['Harbour ferries'], text: 'Ferry refunds follow the tram rules.' }]);
    const queries: WeightedTerm[][] = [
      [{ term: 'refund', weight: 1 }],
      [{ term: 'refunds', weight: 2 }, { term: 'night', weight: 1 }],
      [{ term: 'cafe', weight: 1 }, { term: 'depot', weight: 3 }],
      [{ term: 'café', weight: 1 }],
      [{ term: 'running', weight: 1 }, { term: 'claim', weight: 0.2 }],
      [{ term: 'unknownword', weight: 1 }],
    ];
    for (const w of WEIGHTS) for (const q of queries) for (const c of ['trams', 'ferries']) compare(c, q, 6, 10, w);
    // "refund" stems alike in every form, so the accented and plain queries find the same chunks.
    expect(mem.search('trams', [{ term: 'refunded', count: 1 }], 10, WEIGHTS[0]!)!.map((h) => h.chunkId).sort()).toEqual(
      mem.search('trams', [{ term: 'refund', count: 1 }], 10, WEIGHTS[0]!)!.map((h) => h.chunkId).sort(),
    );
    expect(mem.search('nowhere', [{ term: 'refund', count: 1 }], 10, WEIGHTS[0]!)).toEqual([]);
  });

  it('ranks a generated corpus as FTS5 does: random weighted queries, repeats up to 18, limits, filters, two collections', () => {
    generate(repo, 11, 400);
    const rand = mulberry32(99);
    for (let i = 0; i < 150; i++) {
      const terms = randomQuery(rand);
      const maxRepeat = [1, 6, 18][i % 3]!;
      const w = WEIGHTS[i % WEIGHTS.length]!;
      const collection = i % 4 === 3 ? 'ferries' : 'trams';
      const limit = [10, 50, 1000][i % 3]!;
      const filter = i % 5 === 0 ? { metadata: { group: String(i % 5) } } : i % 7 === 0 ? { documentIds: ['d1', 'd4', 'd7', 'd10', 'd13'] } : undefined;
      compare(collection, terms, maxRepeat, limit, w, filter);
    }
  });

  it('follows the database change by change: an added, then deleted, rows are applied in place before it answers, never by reading the table again', () => {
    generate(repo, 3, 60);
    const q = [{ term: 'ferry', weight: 1 }, { term: 'timetable', weight: 2 }];
    compare('trams', q, 6, 20, WEIGHTS[0]!);
    expect(mem.stats().builds).toBe(1);
    const applied = mem.stats().applied;
    addDoc(repo, 'trams', 'new', 'Ferry timetable', [{ heading: ['Ferry timetable'], text: 'The ferry timetable changes at the weekend.' }]);
    compare('trams', q, 6, 20, WEIGHTS[0]!);
    expect(mem.stats().applied).toBe(applied + 1);
    // Deleting rows changes the row count and lengths both engines read (tests/store/lexical-statistics.test.ts
    // checks them against a fresh ingest), so the scores still agree.
    for (let d = 0; d < 30; d += 3) repo.deleteDocument(`d${d}`);
    repo.deleteDocument('new');
    compare('trams', q, 6, 20, WEIGHTS[0]!);
    compare('ferries', q, 6, 20, WEIGHTS[2]!);
    expect(mem.stats().builds).toBe(1);
    expect(mem.stats().deletedRows + mem.stats().mutableRows).toBeGreaterThan(0);
    // A query that changes nothing applies nothing.
    const after = mem.stats().applied;
    compare('trams', q, 6, 20, WEIGHTS[1]!);
    expect(mem.stats().applied).toBe(after);
  });

  it('reads the table again, at once, when the change log was pruned past what it holds', () => {
    generate(repo, 4, 40);
    const q = [{ term: 'depot', weight: 1 }, { term: 'refund', weight: 2 }];
    compare('trams', q, 6, 20, WEIGHTS[0]!);
    addDoc(repo, 'trams', 'gap', 'Depot refund', [{ heading: ['Depot refund'], text: 'Refund desk at the depot.' }]);
    // What a writer opening the store does to entries older than it keeps (store/sqlite/lexical.ts).
    repo.db.prepare('DELETE FROM lexical_log').run();
    compare('trams', q, 6, 20, WEIGHTS[0]!);
    expect(mem.stats().builds).toBe(2);
  });

  it('is kept short: a writer opening the store drops entries older than it keeps, and a reader still behind them reads the table again', () => {
    generate(repo, 8, 30);
    const head = repo.lexicalHead();
    expect(head).toBeGreaterThan(20);
    sqliteLexical(repo.db, { logKeep: 10 });
    const kept = repo.db.prepare('SELECT count(*) FROM lexical_log').pluck().get() as number;
    expect(kept).toBe(10);
    expect(repo.lexicalHead()).toBe(head);
    const complete = (since: number): boolean => {
      const d = repo.lexicalChanges(since);
      try {
        return d.complete;
      } finally {
        d.release();
      }
    };
    expect(complete(0)).toBe(false);
    expect(complete(head - 10)).toBe(true);
    expect(complete(head - 11)).toBe(false);
  });

  it('declines a word FTS5 splits into a phrase of several tokens (the caller then asks FTS5)', () => {
    addDoc(repo, 'trams', 'mail', 'Contact', [{ heading: ['Contact'], text: 'Send an e-mail to the depot.' }]);
    expect(mem.search('trams', [{ term: 'e-mail', count: 1 }], 10, WEIGHTS[0]!)).toBeNull();
    expect(mem.search('trams', [{ term: 'mail', count: 1 }], 10, WEIGHTS[0]!)).toHaveLength(1);
    // Punctuation alone is an empty phrase: it matches nothing, in FTS5 as here.
    compare('trams', [{ term: '--', weight: 1 }, { term: 'depot', weight: 1 }], 6, 10, WEIGHTS[0]!);
  });
});

describe('retriever with the in-memory lexical engine', () => {
  const noEmbedder: Embedder = { id: 'none', dimensions: 1, semantic: false, maxTokens: 1, countTokens: () => 1, embed: async () => [] };
  const noIndexes = {} as VectorIndexes;

  it('returns the same lexical hits as the FTS5 engine, with RM3 on and off, with filters', async () => {
    const repo = openStore(':memory:');
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 21, 300);
      const rand = mulberry32(7);
      for (const rm3 of [DEFAULT_RM3, null]) {
        const make = (lexicalEngine: 'fts5' | 'memory') =>
          createRetriever({ repo, indexes: noIndexes, embedder: noEmbedder, options: { candidates: 50, rrfK: 60, lexicalWeight: 1, denseWeight: 0.5, fieldWeights: { title: 2, heading: 1, body: 1 }, rm3, lexicalEngine } });
        const fts = make('fts5');
        const memory = make('memory');
        for (let i = 0; i < 25; i++) {
          const query = Array.from({ length: 2 + Math.floor(rand() * 6) }, () => STEMS[Math.floor(rand() * STEMS.length)]).join(' ');
          const filter = i % 4 === 0 ? { metadata: { group: '2' } } : undefined;
          const req = { query, collection: i % 2 ? 'ferries' : 'trams', k: 20, mode: 'lexical' as const, ...(filter ? { filter } : {}) };
          const a = await fts.search(req);
          const b = await memory.search(req);
          expectSameRanking(
            b.map((h) => ({ chunkId: h.chunkId, score: h.score })),
            a.map((h) => ({ chunkId: h.chunkId, score: h.score })),
            20,
          );
        }
      }
    } finally {
      repo.close();
    }
  });

  it('builds in the background on a second connection and never answers from a half-built index', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-lexmem-'));
    const repo = openStore(path.join(dir, 'store.db'));
    const mem = createLexicalMemory(repo, { background: true, minRebuildGapMs: 0 });
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 5, 200);
      const q = phraseCounts([{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }], { maxRepeat: 6 });
      const want = repo.searchFts('trams', toWeightedMatch([{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }], { maxRepeat: 6 })!, 30, WEIGHTS[0]!);
      // Not built yet: no answer (the caller asks FTS5), and a build has started.
      expect(mem.search('trams', q, 30, WEIGHTS[0]!)).toBeNull();
      expect(mem.stats().building).toBe(true);
      await mem.whenReady();
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), want, 30);
      // One written document is applied inside the next query, which then agrees with FTS5 at once.
      addDoc(repo, 'trams', 'late', 'Depot refund', [{ heading: ['Depot refund'], text: 'Depot refund desk hours.' }]);
      const again = repo.searchFts('trams', toWeightedMatch([{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }], { maxRepeat: 6 })!, 30, WEIGHTS[0]!);
      expect(again.map((h) => h.chunkId)).toContain(repo.chunksOfDocuments(['late'])[0]!.id);
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), again, 30);
      expect(mem.stats().builds).toBe(1);
    } finally {
      mem.close();
      repo.close();
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('applies a long run of changes in the background and never answers from a half-applied one', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-lexmem-'));
    const repo = openStore(path.join(dir, 'store.db'));
    const mem = createLexicalMemory(repo, { background: true, minRebuildGapMs: 0, syncLimit: 5 });
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 5, 50);
      await mem.whenReady();
      const terms = [{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }];
      const q = phraseCounts(terms, { maxRepeat: 6 });
      for (let d = 0; d < 50; d += 2) repo.deleteDocument(`d${d}`);
      generate(repo, 6, 40);
      // More logged changes than a query applies itself: FTS5 answers until all of them are in.
      expect(mem.search('trams', q, 30, WEIGHTS[0]!)).toBeNull();
      expect(mem.stats().building).toBe(true);
      await mem.whenReady();
      const want = repo.searchFts('trams', toWeightedMatch(terms, { maxRepeat: 6 })!, 30, WEIGHTS[0]!);
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), want, 30);
      expect(mem.stats().builds).toBe(1);
    } finally {
      mem.close();
      repo.close();
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('a search during a long run of changes waits for it to be applied instead of asking FTS5 beside it', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-lexmem-'));
    const repo = openStore(path.join(dir, 'store.db'));
    // One step a turn: the run takes many turns of the event loop, as a full re-index's switch does.
    const mem = createLexicalMemory(repo, { background: true, minRebuildGapMs: 0, syncLimit: 5, sliceMs: 0, maxWaitMs: 60_000 });
    let ftsCalls = 0;
    const counted = new Proxy(repo, {
      get(target, prop) {
        const v = Reflect.get(target, prop) as unknown;
        if (prop === 'searchFts') return (...args: Parameters<Repository['searchFts']>) => (ftsCalls++, repo.searchFts(...args));
        return typeof v === 'function' ? v.bind(target) : v;
      },
    });
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 5, 50);
      await mem.whenReady();
      expect(mem.waitForWork()).toBeNull();
      for (let d = 0; d < 50; d += 2) repo.deleteDocument(`d${d}`);
      generate(repo, 6, 120);
      const options = { candidates: 50, rrfK: 60, lexicalWeight: 1, denseWeight: 0.5, fieldWeights: WEIGHTS[0]!, rm3: null, lexicalEngine: 'memory' as const };
      const req = { query: 'depot refund', collection: 'trams', k: 20, mode: 'lexical' as const };
      const got = await createRetriever({ repo: counted, indexes: noIndexes, embedder: noEmbedder, options, lexicalIndex: mem }).search(req);
      // The run was long enough to be applied in the background, and the search waited for it.
      expect(mem.stats().applied).toBeGreaterThan(5);
      expect(ftsCalls).toBe(0);
      const want = await createRetriever({ repo, indexes: noIndexes, embedder: noEmbedder, options: { ...options, lexicalEngine: 'fts5' } }).search(req);
      expectSameRanking(
        got.map((h) => ({ chunkId: h.chunkId, score: h.score })),
        want.map((h) => ({ chunkId: h.chunkId, score: h.score })),
        20,
      );
      // The wait is bounded from the work's start: with no time allowed, a search during a long run goes to FTS5.
      const impatient = createLexicalMemory(repo, { background: true, minRebuildGapMs: 0, syncLimit: 5, sliceMs: 0, maxWaitMs: 0 });
      await impatient.whenReady();
      generate(repo, 7, 60);
      ftsCalls = 0;
      const quick = await createRetriever({ repo: counted, indexes: noIndexes, embedder: noEmbedder, options, lexicalIndex: impatient }).search(req);
      expect(impatient.stats().building).toBe(true);
      expect(ftsCalls).toBeGreaterThan(0);
      const fresh = await createRetriever({ repo, indexes: noIndexes, embedder: noEmbedder, options: { ...options, lexicalEngine: 'fts5' } }).search(req);
      expect(quick.map((h) => h.chunkId)).toEqual(fresh.map((h) => h.chunkId));
      await impatient.whenReady();
      impatient.close();
    } finally {
      mem.close();
      repo.close();
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('reads a short run of changes on the change thread; queries answer from the index as it was until it is applied', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-lexmem-'));
    const file = path.join(dir, 'store.db');
    const repo = openStore(file);
    const mem = createLexicalMemory(repo, { background: true, minRebuildGapMs: 0, changeReader: createLexicalChangeThread(file) });
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 5, 50);
      await mem.whenReady();
      const terms = [{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }];
      const q = phraseCounts(terms, { maxRepeat: 6 });
      const fts = (): ReturnType<Repository['searchFts']> => repo.searchFts('trams', toWeightedMatch(terms, { maxRepeat: 6 })!, 30, WEIGHTS[0]!);
      const before = fts();
      const head = mem.stats().head;
      addDoc(repo, 'trams', 'late', 'Depot refund', [{ heading: ['Depot refund'], text: 'Depot refund desk hours.' }]);
      for (let d = 0; d < 12; d += 3) repo.deleteDocument(`d${d}`);
      const after = fts();
      expect(after.map((h) => h.chunkId)).toContain(repo.chunksOfDocuments(['late'])[0]!.id);
      // Behind by a short run: answered at once, by the index as it was before both writes (none of either).
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), before, 30);
      expect(mem.stats().head).toBe(head);
      await mem.whenReady();
      expect(mem.stats().head).toBe(repo.lexicalHead());
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), after, 30);
      expect(mem.stats()).toMatchObject({ builds: 1, threadReads: 1 });
    } finally {
      mem.close();
      repo.close();
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('stops answering from an index behind the log after maxLagMs, and syncNow or a failed change thread applies the changes here', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-lexmem-'));
    const repo = openStore(path.join(dir, 'store.db'));
    let fail: (e: Error) => void = () => undefined;
    const errors: unknown[] = [];
    // A change thread that answers only when told to fail.
    const reader: LexicalChangeReader = { read: () => new Promise((_, reject) => (fail = reject)), close: () => undefined };
    const mem = createLexicalMemory(repo, { background: true, minRebuildGapMs: 0, changeReader: reader, maxLagMs: 50, onError: (e) => errors.push(e) });
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 5, 30);
      await mem.whenReady();
      const terms = [{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }];
      const q = phraseCounts(terms, { maxRepeat: 6 });
      const fts = (): ReturnType<Repository['searchFts']> => repo.searchFts('trams', toWeightedMatch(terms, { maxRepeat: 6 })!, 30, WEIGHTS[0]!);
      const before = fts();
      addDoc(repo, 'trams', 'late', 'Depot refund', [{ heading: ['Depot refund'], text: 'Depot refund desk hours.' }]);
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), before, 30);
      await waitFor(() => mem.search('trams', q, 30, WEIGHTS[0]!) === null, { what: 'FTS5 to answer once the index lags more than 50 ms' });
      mem.syncNow();
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), fts(), 30);
      // The thread's late answer (here a failure) is ignored for the data, reported, and changes are read here after.
      fail(new Error('the change thread stopped'));
      await waitFor(() => errors.length === 1, { what: 'the change thread failure reported' });
      addDoc(repo, 'trams', 'later', 'Depot refund kiosk', [{ heading: ['Depot'], text: 'Refund kiosk at the depot.' }]);
      expectSameRanking(mem.search('trams', q, 30, WEIGHTS[0]!), fts(), 30);
      expect(mem.stats().threadReads).toBe(0);
    } finally {
      mem.close();
      repo.close();
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('cuts the first load into segments of at most maxSegmentRows and never merges past it', () => {
    const repo = openStore(':memory:');
    try {
      for (const c of ['trams', 'ferries']) repo.ensureCollection(c);
      generate(repo, 7, 60);
      const mem = createLexicalMemory(repo, { maxSegmentRows: 16, mutableRows: 4, mergeFactor: 2 });
      const q = phraseCounts([{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }], { maxRepeat: 6 });
      const want = (): ReturnType<Repository['searchFts']> => repo.searchFts('trams', toWeightedMatch([{ term: 'depot', weight: 1 }, { term: 'refund', weight: 1 }], { maxRepeat: 6 })!, 50, WEIGHTS[0]!);
      expectSameRanking(mem.search('trams', q, 50, WEIGHTS[0]!), want(), 50);
      const rows = mem.stats().rows;
      expect(mem.stats().segments).toBeGreaterThanOrEqual(Math.ceil(rows / 16));
      expect(mem.stats().largestSegmentRows).toBeLessThanOrEqual(16);
      for (let d = 0; d < 60; d += 2) repo.deleteDocument(`d${d}`);
      generate(repo, 8, 40);
      expectSameRanking(mem.search('trams', q, 50, WEIGHTS[0]!), want(), 50);
      expect(mem.stats().merges).toBeGreaterThan(0);
      expect(mem.stats().largestSegmentRows).toBeLessThanOrEqual(16);
      mem.close();
    } finally {
      repo.close();
    }
  });

  it('is switched on by retrieval.lexicalEngine in the service: after the build, lexical search makes no FTS5 query', async () => {
    const t = await tempRuntime({ retrieval: { lexicalEngine: 'memory' } });
    try {
      await t.rt.ingestor.ingestPath(t.config.seed.path, { collection: t.config.seed.collection });
      let calls = 0;
      const real = t.rt.repo.searchFts.bind(t.rt.repo);
      t.rt.repo.searchFts = (...args) => {
        calls++;
        return real(...args);
      };
      const req = { query: 'how long is the refund window for annual passes', collection: t.config.seed.collection, k: 5, mode: 'lexical' as const };
      // The same search answered by FTS5 alone (both passes: the query and its RM3 expansion).
      const ftsOnly = createRetriever({ repo: t.rt.repo, indexes: t.rt.indexes, embedder: t.rt.embedder, options: { ...retrieverOptions(t.config.retrieval), lexicalEngine: 'fts5' } });
      const first = await ftsOnly.search(req);
      expect(calls).toBe(2);
      // The index builds in the background: search until one makes no FTS5 query, within a deadline.
      const after = await waitFor(
        async () => {
          calls = 0;
          const hits = await t.rt.retriever.search(req);
          return calls === 0 ? hits : null;
        },
        { what: 'a lexical search answered by the in-memory index alone (no FTS5 query)', timeoutMs: 20_000, intervalMs: 25 },
      );
      expect(calls).toBe(0);
      expect(after.map((h) => h.chunkId)).toEqual(first.map((h) => h.chunkId));
      after.forEach((h, i) => expect(h.score).toBeCloseTo(first[i]!.score, 9));
    } finally {
      t.cleanup();
    }
  });

  it('applies the rows of a finished upload job when the job ends, before any query, without reading the table again', async () => {
    const t = await tempRuntime({ retrieval: { lexicalEngine: 'memory' } });
    const { queue, documents } = createDocumentApi(t.rt, 'thread');
    try {
      const index = t.rt.lexicalIndex!;
      await index.whenReady();
      expect(index.stats().builds).toBe(1);
      const out = await documents.upload('c', 'ferry-bikes.md', new TextEncoder().encode('# Bikes on the ferry\n\nFolding bikes travel free on the Quarrel Lane ferry.'));
      expect(out.status).toBe('queued');
      await withDeadline(queue.idle(), { what: 'the upload job to finish', timeoutMs: 20_000 });
      // The job thread wrote the rows; this thread heard the job end and asked the change thread for them, then
      // applied them (no query has run).
      await waitFor(() => index.stats().head === t.rt.repo.lexicalHead(), { what: 'the upload job\'s rows in the in-memory index' });
      expect(index.stats().applied).toBeGreaterThan(0);
      expect(index.stats().threadReads).toBeGreaterThan(0);
      expect(index.stats().builds).toBe(1);
    } finally {
      await queue.close();
      t.cleanup();
    }
  });
});
