// The library option for the lexical engine, measured: MiniSearch (npm `minisearch`, a devDependency used only
// here) over exactly the chunks the service indexes, scored with the same metrics as `sourcebound eval
// retrieval --mode lexical`, plus its query latency at a synthetic 100k-chunk corpus beside the project's engine.
//
//   npm run build && node tests/bench/minisearch-compare.mjs [eval|latency]
//
// The project's own figures come from `sourcebound eval retrieval --mode lexical --rm3 off|on` (same chunks).
// MiniSearch is given the stop list and a lower-casing term filter; it has no stemmer of its own, so it is run
// both without one and with the porter stemmer the service's FTS5 tokenizer uses (terms stemmed by the store's
// own query tokenizer, so both engines see the same tokens).
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import MiniSearch from 'minisearch';
import { loadConfig } from '../../dist/config/index.js';
import { configuredLogger } from '../../dist/logger.js';
import { createRuntime } from '../../dist/runtime.js';
import { corpusDocToLoaded } from '../../dist/eval/retrieval.js';
import { readCorpus, readQrels, readQueries } from '../../dist/eval/data.js';
import { scoreRun } from '../../dist/eval/metrics.js';
import { STOP_WORDS, queryTerms } from '../../dist/retrieve/index.js';
import { latencySummary } from './generate.mjs';

const evalRoot = process.env.SOURCEBOUND_EVAL_DIR ?? '/work/shared/eval';
const log = (m) => process.stderr.write(`${m}\n`);
const part = process.argv[2];

/** MiniSearch options: its BM25+ (k1 1.2, b 0.7, delta 0.5 by default) or the plain BM25 FTS5 uses. */
function miniOptions(stem, bm25) {
  const process = (t) => {
    const w = t.toLowerCase();
    if (!w || STOP_WORDS.has(w)) return null;
    return stem ? stem(w) : w;
  };
  return {
    fields: ['title', 'heading', 'body'],
    storeFields: ['source'],
    processTerm: process,
    searchOptions: { processTerm: process, combineWith: 'OR', ...(bm25 ? { bm25 } : {}) },
  };
}

async function evaluate(name) {
  const dir = path.join(evalRoot, name);
  const corpus = readCorpus(path.join(dir, 'corpus.jsonl'));
  const queries = readQueries(path.join(dir, 'queries.jsonl'));
  const qrels = readQrels(path.join(dir, 'qrels.txt'));
  const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-minisearch-'));
  const config = loadConfig({ env: { SOURCEBOUND_EMBEDDER: 'hashing' }, overrides: { dataDir, seed: { ingestOnEmpty: false } } });
  const rt = await createRuntime(config, configuredLogger(config, { quiet: true }));
  try {
    await rt.ingestor.ingestLoaded(
      'eval',
      corpus
        .filter((d) => d.text.trim() || d.title.trim())
        .map((d) => ({ source: d.id, loaded: corpusDocToLoaded(d), contentHash: createHash('sha256').update(`${d.title}\n${d.text}`).digest('hex'), byteSize: Buffer.byteLength(d.text) })),
    );
    const ids = rt.repo.chunksOfCollection('eval').map((c) => c.id);
    const views = rt.repo.chunkViews(ids);
    const chunks = [...views.values()].map((v) => ({ id: v.chunkId, source: v.source, title: v.title, heading: v.headingPath.join(' '), body: v.text }));
    const tokenizer = rt.repo.queryTokenizer();
    const porter = (w) => tokenizer([w])[0]?.[0] ?? w;
    const out = {};
    for (const [label, stem, bm25] of [
      ['minisearch (BM25+ defaults, no stemming)', null, null],
      ['minisearch (BM25+ defaults, porter)', porter, null],
      ['minisearch (k1 1.2, b 0.75, delta 0, porter)', porter, { k: 1.2, b: 0.75, d: 0 }],
    ]) {
      const ms = new MiniSearch(miniOptions(stem, bm25));
      ms.addAll(chunks);
      const runs = new Map();
      for (const q of queries) {
        const text = queryTerms(q.text).join(' ');
        const seen = new Set();
        const ranking = [];
        for (const h of ms.search(text)) {
          if (seen.has(h.source)) continue;
          seen.add(h.source);
          ranking.push(h.source);
          if (ranking.length >= 100) break;
        }
        runs.set(q.id, ranking);
      }
      const asked = new Map([...qrels].filter(([q]) => runs.has(q)));
      out[label] = scoreRun(runs, asked);
    }
    tokenizer.close();
    return out;
  } finally {
    rt.close();
    rmSync(dataDir, { recursive: true, force: true });
  }
}

if (!part || part === 'eval') {
  for (const name of ['cisi', 'cranfield']) {
    const r = await evaluate(name);
    for (const [label, s] of Object.entries(r)) console.log(`${name}\t${label}\tndcg@10 ${s['ndcg@10']}\tmap ${s.map}\trecall@100 ${s['recall@100']}`);
  }
}

if (!part || part === 'latency') {
  // The same synthetic store as the retrieval latency benchmark; MiniSearch indexes its chunk texts.
  const { buildBenchStore } = await import('./retrieval-latency.mjs');
  const { createLexicalMemory } = await import('../../dist/retrieve/index.js');
  const chunks = Number(process.env.BENCH_CHUNKS ?? 100_000);
  const bench = buildBenchStore({ chunks, queries: 200, log });
  const ids = bench.repo.chunksOfCollection('bench').map((c) => c.id);
  const views = bench.repo.chunkViews(ids);
  const ms = new MiniSearch(miniOptions(null, { k: 1.2, b: 0.75, d: 0 }));
  let t0 = performance.now();
  ms.addAll([...views.values()].map((v) => ({ id: v.chunkId, source: v.source, title: v.title, heading: v.headingPath.join(' '), body: v.text })));
  const msBuild = (performance.now() - t0) / 1000;
  const mem = createLexicalMemory(bench.repo);
  t0 = performance.now();
  mem.syncNow();
  const ownBuild = (performance.now() - t0) / 1000;
  const tokens = bench.repo.queryTokenizer();
  const w = { title: 1, heading: 1, body: 1 };
  const time = (fn) => bench.qTexts.map((q) => {
    const s = performance.now();
    fn(q);
    return performance.now() - s;
  });
  const own = time((q) => mem.search('bench', queryTerms(q).map((t) => ({ term: t, count: 1 })), 100, w));
  const mini = time((q) => ms.search(queryTerms(q).join(' ')).slice(0, 100));
  console.log(`latency at ${chunks} chunks (${bench.qTexts.length} queries): own build ${ownBuild.toFixed(1)} s, minisearch build ${msBuild.toFixed(1)} s`);
  console.log(`own engine ${JSON.stringify(latencySummary(own))}`);
  console.log(`minisearch ${JSON.stringify(latencySummary(mini))}`);
  tokens.close();
  mem.close();
  bench.close();
}
