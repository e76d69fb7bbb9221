// Query latency of lexical, dense and hybrid search at a given number of chunks, through the real store,
// vector index and retriever (compiled, from dist/). Query embedding is excluded: the embedder returns
// pre-generated vectors from a table.
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { createVectorIndexes, openDatabase, SqliteStore } from '../../dist/store/index.js';
import { createLexicalMemory, createRetriever, retrieverOptions, STOP_WORDS } from '../../dist/retrieve/index.js';
import { configSchema } from '../../dist/config/schema.js';
import { clusteredVectors, latencySummary, rng, vocabulary, zipfSampler } from './generate.mjs';

const DIMS = 384;
const CHUNKS_PER_DOC = 10;
const WORDS_PER_CHUNK = 120;

/**
 * Builds the generated store and vector index (or reopens one kept in `keepDir` by an earlier call, so that
 * profiling runs need not rebuild 100k chunks) and the query texts with their pre-generated vectors.
 */
export function buildBenchStore({ chunks, queries = 500, log = () => {}, keepDir }) {
  const dir = keepDir ?? mkdtempSync(path.join(tmpdir(), 'sb-bench-store-'));
  const reuse = keepDir !== undefined && existsSync(path.join(dir, 'ready'));
  const db = openDatabase(path.join(dir, 'bench.db'));
  db.pragma('synchronous = OFF');
  const repo = new SqliteStore(db);
  // The most frequent words of real text are function words; put the stop list at the head of the Zipf
  // ranking so the synthetic text has the same shape (the query parser drops them, as it would in use).
  const vocab = [...STOP_WORDS, ...vocabulary(30_000)];
  const content = STOP_WORDS.size;
  const rand = rng(3);
  const word = zipfSampler(vocab.length, rand);
  const vectors = clusteredVectors({ count: chunks + queries, dims: DIMS, seed: 21 });
  let storeSeconds = 0;
  if (!reuse) {
    repo.ensureCollection('bench');
    repo.setCollectionEmbedder('bench', 'bench-384', DIMS);
    const t0 = performance.now();
    const docs = Math.ceil(chunks / CHUNKS_PER_DOC);
    let n = 0;
    repo.transaction(() => {
      for (let d = 0; d < docs; d++) {
        const texts = [];
        const inputs = [];
        const vecs = new Map();
        let offset = 0;
        for (let c = 0; c < CHUNKS_PER_DOC && n < chunks; c++, n++) {
          const words = [];
          for (let w = 0; w < WORDS_PER_CHUNK; w++) words.push(vocab[word()]);
          const text = words.join(' ');
          texts.push(text);
          const hash = `h${n}`;
          inputs.push({ ordinal: c, text, start: offset, end: offset + text.length, headingPath: [`Part ${c + 1}`], pageStart: null, pageEnd: null, tokenCount: WORDS_PER_CHUNK, chunkHash: hash });
          vecs.set(hash, vectors[n]);
          offset += text.length + 2;
        }
        repo.replaceDocument(
          { id: `doc${d}`, collection: 'bench', source: `doc${d}.txt`, root: null, title: `Notice ${d}`, format: 'text', contentHash: `c${d}`, byteSize: offset, pageCount: null, effectiveDate: null, metadata: { group: String(d % 100) }, text: texts.join('\n\n'), settingsKey: 'bench' },
          inputs,
          vecs,
          'bench-384',
        );
      }
    });
    storeSeconds = (performance.now() - t0) / 1000;
    log(`stored ${chunks} chunks in ${storeSeconds.toFixed(1)} s; building the vector index`);
  } else {
    // Advance the text generator past the stored chunks so the queries come out the same as on a fresh build.
    for (let i = 0; i < chunks * WORDS_PER_CHUNK; i++) word();
  }
  const indexes = createVectorIndexes({ repo, dir: path.join(dir, 'index'), embedderId: 'bench-384', dimensions: DIMS, params: { m: 16, efConstruction: 200, efSearch: 128 } });
  const t1 = performance.now();
  indexes.sync('bench');
  const indexSeconds = reuse ? 0 : (performance.now() - t1) / 1000;
  if (keepDir !== undefined) writeFileSync(path.join(dir, 'ready'), '');

  // Queries: 3–6 words of middling frequency, as content words of a real question would be.
  const qTexts = [];
  for (let q = 0; q < queries; q++) {
    const len = 3 + Math.floor(rand() * 4);
    const words = [];
    for (let i = 0; i < len; i++) words.push(vocab[content + 50 + Math.floor(rand() * 5000)]);
    qTexts.push(words.join(' '));
  }
  const qVec = new Map(qTexts.map((t, i) => [t, vectors[chunks + i]]));
  const close = () => {
    indexes.close();
    db.close();
    if (keepDir === undefined) rmSync(dir, { recursive: true, force: true });
  };
  return { db, repo, indexes, indexDir: path.join(dir, 'index'), qTexts, qVec, storeSeconds, indexSeconds, close };
}

/**
 * Latency of each setting in `settings` ({ label, tuning }) with each lexical engine in `engines`, all on one
 * generated store. The in-memory lexical index is built once, before any timing, and its build time and
 * memory are reported (`lexicalIndex`).
 */
export async function runLatencyBench({ chunks, queries = 500, log = () => {}, settings = [{ label: 'defaults', tuning: {} }], engines = ['fts5', 'memory'], keepDir }) {
  const { db, repo, indexes, qTexts, qVec, storeSeconds, indexSeconds, close } = buildBenchStore({ chunks, queries, log, keepDir });
  const embedder = { id: 'bench-384', dimensions: DIMS, semantic: true, maxTokens: 256, countTokens: (t) => t.split(' ').length, embed: async (ts) => ts.map((t) => qVec.get(t)) };
  let lexicalIndex;
  let lexicalStats;
  if (engines.includes('memory')) {
    globalThis.gc?.();
    const rss0 = process.memoryUsage().rss;
    const heap0 = process.memoryUsage().heapUsed;
    const t0 = performance.now();
    lexicalIndex = createLexicalMemory(repo);
    lexicalIndex.syncNow();
    const seconds = (performance.now() - t0) / 1000;
    globalThis.gc?.();
    const s = lexicalIndex.stats();
    lexicalStats = {
      seconds,
      rows: s.rows,
      terms: s.terms,
      postings: s.postings,
      arrayMiB: s.arrayBytes / 2 ** 20,
      rssGrowthMiB: (process.memoryUsage().rss - rss0) / 2 ** 20,
      heapGrowthMiB: (process.memoryUsage().heapUsed - heap0) / 2 ** 20,
    };
    log(`  in-memory lexical index: ${s.rows} rows, ${s.terms} terms, ${s.postings} postings, built in ${seconds.toFixed(1)} s, typed arrays ${lexicalStats.arrayMiB.toFixed(0)} MiB, RSS growth ${lexicalStats.rssGrowthMiB.toFixed(0)} MiB`);
  }
  const bySetting = {};
  for (const { label, tuning } of settings) {
    for (const engine of engines) {
      const name = engines.length > 1 ? `${label}, lexical engine ${engine}` : label;
      log(`  ${name}`);
      const options = { ...SERVICE_OPTIONS, ...tuning, lexicalEngine: engine };
      bySetting[name] = await measure(createRetriever({ repo, indexes, embedder, options, ...(engine === 'memory' ? { lexicalIndex } : {}) }), qTexts);
    }
  }
  lexicalIndex?.close();
  close();
  return { chunks, queries, storeSeconds, indexSeconds, lexicalIndex: lexicalStats, results: bySetting };
}

// The service's retriever options with every retrieval setting at its config default (src/config/schema.ts).
const SERVICE_OPTIONS = retrieverOptions(configSchema.parse({}).retrieval);

async function measure(retriever, qTexts) {
  const results = {};
  for (const mode of ['lexical', 'dense', 'hybrid']) {
    for (const q of qTexts.slice(0, 20)) await retriever.search({ query: q, collection: 'bench', k: 10, mode }); // warm-up
    const ms = [];
    for (const q of qTexts) {
      const s = performance.now();
      await retriever.search({ query: q, collection: 'bench', k: 10, mode });
      ms.push(performance.now() - s);
    }
    results[mode] = latencySummary(ms);
  }
  // A selective metadata filter (1 document group in 100): the dense leg must still fill k.
  const ms = [];
  let short = 0;
  for (const q of qTexts.slice(0, 200)) {
    const s = performance.now();
    const hits = await retriever.search({ query: q, collection: 'bench', k: 10, mode: 'hybrid', filter: { metadata: { group: '7' } } });
    ms.push(performance.now() - s);
    if (hits.length < 10) short++;
  }
  results['hybrid, filter 1%'] = { ...latencySummary(ms), short };
  return results;
}
