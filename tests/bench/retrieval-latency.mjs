// Query latency of lexical, dense and hybrid search at a given number of chunks, through the real store,
// vector index and retriever (compiled, from dist/). Query embedding is excluded: the embedder returns
// pre-generated vectors from a table.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { createRepository, createVectorIndexes, openDatabase } from '../../dist/store/index.js';
import { createRetriever, DEFAULT_FIELD_WEIGHTS, STOP_WORDS } from '../../dist/retrieve/index.js';
import { clusteredVectors, latencySummary, rng, vocabulary, zipfSampler } from './generate.mjs';

const DIMS = 384;
const CHUNKS_PER_DOC = 10;
const WORDS_PER_CHUNK = 120;

export async function runLatencyBench({ chunks, queries = 500, log = () => {}, tuning = {} }) {
  const dir = mkdtempSync(path.join(tmpdir(), 'sb-bench-store-'));
  const db = openDatabase(path.join(dir, 'bench.db'));
  db.pragma('synchronous = OFF');
  const repo = createRepository(db);
  repo.ensureCollection('bench');
  // The most frequent words of real text are function words; put the stop list at the head of the Zipf
  // ranking so the synthetic text has the same shape (the query parser drops them, as it would in use).
  const vocab = [...STOP_WORDS, ...vocabulary(30_000)];
  const content = STOP_WORDS.size;
  const rand = rng(3);
  const word = zipfSampler(vocab.length, rand);
  const vectors = clusteredVectors({ count: chunks + queries, dims: DIMS, seed: 21 });
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
  const storeSeconds = (performance.now() - t0) / 1000;
  log(`stored ${chunks} chunks in ${storeSeconds.toFixed(1)} s; building the vector index`);
  const indexes = createVectorIndexes({ repo, dir: path.join(dir, 'index'), embedderId: 'bench-384', dimensions: DIMS, params: { m: 16, efConstruction: 200, efSearch: 128 } });
  const t1 = performance.now();
  indexes.sync('bench');
  const indexSeconds = (performance.now() - t1) / 1000;

  // Queries: 3–6 words of middling frequency, as content words of a real question would be.
  const qTexts = [];
  for (let q = 0; q < queries; q++) {
    const len = 3 + Math.floor(rand() * 4);
    const words = [];
    for (let i = 0; i < len; i++) words.push(vocab[content + 50 + Math.floor(rand() * 5000)]);
    qTexts.push(words.join(' '));
  }
  const qVec = new Map(qTexts.map((t, i) => [t, vectors[chunks + i]]));
  const embedder = { id: 'bench-384', dimensions: DIMS, semantic: true, maxTokens: 256, countTokens: (t) => t.split(' ').length, embed: async (ts) => ts.map((t) => qVec.get(t)) };
  const retriever = createRetriever({ repo, indexes, embedder, options: { candidates: 50, rrfK: 60, lexicalWeight: 1, denseWeight: 0.5, fieldWeights: DEFAULT_FIELD_WEIGHTS, ...tuning } });

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
  indexes.close();
  db.close();
  rmSync(dir, { recursive: true, force: true });
  return { chunks, queries, storeSeconds, indexSeconds, results };
}
