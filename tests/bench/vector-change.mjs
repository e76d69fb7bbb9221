// The vector index changed in place, at a given number of chunks (default 100k x 384), through the real store,
// vector index files and retriever (compiled, from dist/):
//  - hybrid p95 and hybrid p95 with a metadata filter (service defaults, in-memory lexical engine), before any change;
//  - how long a one-document change takes to become searchable: the writer (as the job thread or a CLI run does)
//    writes the document, applies it to its index in place and saves the file; the reader (the request thread)
//    reads that file off the thread from its next query on (answering from the index it has meanwhile) and finds
//    the new chunk once the read is done. Each part timed, medians of several changes, with the longest the
//    request thread was held up during the read (the event loop's delay, sampled every millisecond);
//  - the filter's vector cache: how long it takes to fill after the collection's first filtered query, and its size;
//  - recall@10 of the reader's index against exact search over every stored vector, after many documents were
//    updated in place (their old points left as tombstones).
// Run: npm run build && node --expose-gc tests/bench/vector-change.mjs [chunks]
import path from 'node:path';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { createVectorIndexes } from '../../dist/store/index.js';
import { createLexicalMemory, createRetriever, retrieverOptions } from '../../dist/retrieve/index.js';
import { configSchema } from '../../dist/config/schema.js';
import { buildBenchStore } from './retrieval-latency.mjs';
import { clusteredVectors, latencySummary, percentile } from './generate.mjs';

const DIMS = 384;
const SERVICE = configSchema.parse({});
const OPTIONS = { ...retrieverOptions(SERVICE.retrieval), lexicalEngine: 'memory' };
const median = (xs) => percentile([...xs].sort((a, b) => a - b), 50);

export async function runVectorChangeBench({ chunks = 100_000, queries = 300, changes = 7, churnDocs = 300, recallQueries = 100, log = () => {} } = {}) {
  const { repo, indexes, indexDir, qTexts, qVec, storeSeconds, indexSeconds, close } = buildBenchStore({ chunks, queries, log });
  const embedder = { id: 'bench-384', dimensions: DIMS, semantic: true, maxTokens: 256, countTokens: (t) => t.split(' ').length, embed: async (ts) => ts.map((t) => qVec.get(t) ?? extra.get(t)) };
  const extra = new Map();
  const lexicalIndex = createLexicalMemory(repo);
  lexicalIndex.syncNow();
  const retriever = createRetriever({ repo, indexes, embedder, options: OPTIONS, lexicalIndex });
  const out = { chunks, storeSeconds, indexSeconds, recallQueries };
  // The filter's vector cache fills in the background after the first filtered query; the latencies below are
  // those of a warm service. The fill is timed on its own.
  const fillStart = performance.now();
  await retriever.search({ query: qTexts[0], collection: 'bench', k: 10, mode: 'hybrid', filter: { metadata: { group: '0' } } });
  await indexes.settled('bench');
  out.cache = { fillMs: performance.now() - fillStart, vectors: indexes.cachedVectors('bench') };
  log(`  filter vector cache: ${out.cache.vectors} vectors in ${out.cache.fillMs.toFixed(0)} ms`);

  // 1. latency before any change. With SB_BENCH_BASELINE_DIST (the dist/ folder of an earlier build), that
  // build's store, vector index and retriever answer the same queries on the same files, alternating query by
  // query with this build's, so that both see the same load.
  const baseline = process.env.SB_BENCH_BASELINE_DIST ? await baselineRetriever(process.env.SB_BENCH_BASELINE_DIST, repo.db.name, indexDir, embedder) : null;
  const time = async (req, r = retriever) => {
    const s = performance.now();
    const hits = await r.search(req);
    return { ms: performance.now() - s, hits };
  };
  if (baseline) {
    const runs = { hybrid: [[], []], filtered: [[], []] };
    for (const q of qTexts.slice(0, 20)) for (const r of [retriever, baseline.retriever]) await r.search({ query: q, collection: 'bench', k: 10, mode: 'hybrid' });
    for (const [i, q] of qTexts.entries()) {
      for (const [j, r] of [retriever, baseline.retriever].entries()) {
        runs.hybrid[j].push((await time({ query: q, collection: 'bench', k: 10, mode: 'hybrid' }, r)).ms);
        runs.filtered[j].push((await time({ query: q, collection: 'bench', k: 10, mode: 'hybrid', filter: { metadata: { group: String(i % 100) } } }, r)).ms);
      }
    }
    out.versus = Object.fromEntries(Object.entries(runs).map(([k, [now, base]]) => [k, { now: latencySummary(now), base: latencySummary(base) }]));
    baseline.close();
    log(`  against the baseline: hybrid p95 ${out.versus.hybrid.base.p95.toFixed(2)} -> ${out.versus.hybrid.now.p95.toFixed(2)} ms, filtered p95 ${out.versus.filtered.base.p95.toFixed(2)} -> ${out.versus.filtered.now.p95.toFixed(2)} ms`);
  }
  for (const q of qTexts.slice(0, 20)) await retriever.search({ query: q, collection: 'bench', k: 10, mode: 'hybrid' });
  const hybrid = [];
  for (const q of qTexts) hybrid.push((await time({ query: q, collection: 'bench', k: 10, mode: 'hybrid' })).ms);
  out.hybrid = latencySummary(hybrid);
  // A 1% metadata filter, a different group each query (so no query is answered from a warm allowed set).
  const filtered = [];
  let short = 0;
  for (const [i, q] of qTexts.entries()) {
    const r = await time({ query: q, collection: 'bench', k: 10, mode: 'hybrid', filter: { metadata: { group: String(i % 100) } } });
    filtered.push(r.ms);
    if (r.hits.length < 10) short++;
  }
  out.filtered = { ...latencySummary(filtered), short };
  const allowed = [];
  for (let i = 0; i < 100; i++) {
    const s = performance.now();
    repo.chunkIdsMatching('bench', { metadata: { group: String(i) } });
    allowed.push(performance.now() - s);
  }
  out.allowedSetMs = median(allowed);
  log(`  hybrid p95 ${out.hybrid.p95.toFixed(2)} ms, filtered p95 ${out.filtered.p95.toFixed(2)} ms, allowed set ${out.allowedSetMs.toFixed(2)} ms`);

  // 2. one-document change -> searchable. The writer is a second set of indexes on the same files, as the job
  // thread is; it starts from the file the reader's start-up saved.
  const writer = createVectorIndexes({ repo, dir: indexDir, embedderId: 'bench-384', dimensions: DIMS, params: SERVICE.retrieval.hnsw });
  // New points and probe queries from the same clustered distribution as the stored ones (the generator's
  // sequence goes on past the stored chunks and the query vectors).
  const tail = clusteredVectors({ count: chunks + queries + changes * 10 + churnDocs * 10 + recallQueries, dims: DIMS, seed: 21 }).slice(chunks + queries);
  const newVectors = tail.slice(0, changes * 10 + churnDocs * 10);
  const probes = tail.slice(changes * 10 + churnDocs * 10);
  let nv = 0;
  const writeDoc = (id, n) => {
    const inputs = [];
    const vecs = new Map();
    for (let c = 0; c < n; c++) {
      const text = `changed notice ${id} part ${c} ${nv}`;
      const hash = `x${id}-${nv}`;
      inputs.push({ ordinal: c, text, start: 0, end: text.length, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 6, chunkHash: hash });
      vecs.set(hash, newVectors[nv++]);
    }
    const r = repo.replaceDocument(
      { id, collection: 'bench', source: `${id}.txt`, root: null, title: `Changed ${id}`, format: 'text', contentHash: `x${nv}`, byteSize: 1, pageCount: null, effectiveDate: null, metadata: { group: 'changed' }, text: 'x', settingsKey: 'bench' },
      inputs,
      vecs,
      'bench-384',
    );
    const applied = writer.apply('bench', { generation: r.generation, removed: r.removedChunkIds, added: r.chunkIds.map((cid, i) => ({ id: cid, vector: vecs.get(inputs[i].chunkHash) })) });
    return { r, inputs, vecs, applied };
  };
  const parts = { write: [], save: [], start: [], during: [], load: [], stall: [], query: [], total: [] };
  let inPlace = 0;
  for (let i = 0; i < changes; i++) {
    const id = i % 2 === 0 ? `new${i}` : `doc${i * 37}`; // alternately a new document and an update of a stored one
    const t0 = performance.now();
    const { r, inputs, vecs, applied } = writeDoc(id, 10);
    const tApplied = performance.now();
    inPlace += applied ? 1 : 0;
    writer.sync('bench');
    const tSaved = performance.now();
    const delay = monitorEventLoopDelay({ resolution: 1 });
    delay.enable();
    // The next query starts the read and is answered from the index the reader has, without waiting for it.
    const loading = indexes.sync('bench', { persist: false });
    const tStarted = performance.now();
    const qtext = `probe ${i}`;
    extra.set(qtext, vecs.get(inputs[0].chunkHash));
    const during = await retriever.search({ query: qtext, collection: 'bench', k: 10, mode: 'dense' });
    const tDuring = performance.now();
    await indexes.settled('bench');
    const tLoaded = performance.now();
    delay.disable();
    const hits = await retriever.search({ query: qtext, collection: 'bench', k: 10, mode: 'dense' });
    const tFound = performance.now();
    if (!loading.loading || during.some((h) => r.chunkIds.includes(h.chunkId))) throw new Error(`change ${i}: the query during the read did not use the index the reader had`);
    if (hits[0]?.chunkId !== r.chunkIds[0]) throw new Error(`change ${i} not searchable after the read`);
    parts.write.push(tApplied - t0);
    parts.save.push(tSaved - tApplied);
    parts.start.push(tStarted - tSaved);
    parts.during.push(tDuring - tStarted);
    parts.load.push(tLoaded - tSaved);
    parts.stall.push(delay.max / 1e6);
    parts.query.push(tFound - tLoaded);
    parts.total.push(tFound - t0);
  }
  out.change = Object.fromEntries(Object.entries(parts).map(([k, v]) => [k, median(v)]));
  out.change.inPlace = inPlace;
  out.change.changes = changes;
  log(`  one-document change searchable in ${out.change.total.toFixed(0)} ms median (save ${out.change.save.toFixed(0)}, read ${out.change.load.toFixed(0)}, longest stall ${out.change.stall.toFixed(1)})`);

  out.recallBefore = recallAt10(repo, indexes, probes);
  log(`  recall@10 before the updates ${out.recallBefore.toFixed(4)}`);
  // 3. recall@10 after `churnDocs` documents were updated in place (each one's old points left as tombstones).
  for (let d = 0; d < churnDocs; d++) {
    const { applied } = writeDoc(`doc${(d * 131) % Math.ceil(chunks / 10)}`, 10);
    if (!applied) throw new Error('an update did not go in place');
  }
  const churn = writer.sync('bench');
  indexes.sync('bench', { persist: false });
  await indexes.settled('bench');
  out.churn = { docs: churnDocs, tombstones: indexes.deletedCount('bench'), live: indexes.size('bench'), compacted: churn.compacted === true };
  out.churn.recall = recallAt10(repo, indexes, probes);
  log(`  after ${churnDocs} updates in place: ${out.churn.tombstones} tombstones, recall@10 ${out.churn.recall.toFixed(4)}`);
  lexicalIndex.close();
  writer.close();
  close();
  return out;
}

/** An earlier build's retriever over the same database and index files (in-memory lexical engine, defaults). */
async function baselineRetriever(dist, dbFile, indexDir, embedder) {
  const store = await import(path.join(dist, 'store', 'index.js'));
  const retrieve = await import(path.join(dist, 'retrieve', 'index.js'));
  const config = await import(path.join(dist, 'config', 'schema.js'));
  const repo = new store.SqliteStore(store.openDatabase(dbFile));
  const cfg = config.configSchema.parse({});
  const indexes = store.createVectorIndexes({ repo, dir: indexDir, embedderId: 'bench-384', dimensions: DIMS, params: cfg.retrieval.hnsw });
  indexes.sync('bench', { persist: false });
  const lexicalIndex = retrieve.createLexicalMemory(repo);
  lexicalIndex.syncNow();
  const retriever = retrieve.createRetriever({ repo, indexes, embedder, options: { ...retrieve.retrieverOptions(cfg.retrieval), lexicalEngine: 'memory' }, lexicalIndex });
  return { retriever, close: () => { lexicalIndex.close(); indexes.close(); repo.close(); } };
}

/** Recall@10 of the index's search against exact inner-product search over every stored vector. */
function recallAt10(repo, indexes, probes) {
  const rows = repo.chunksOfCollection('bench');
  const stored = repo.getVectors('bench-384', rows.map((r) => r.chunkHash));
  const data = rows.map((r) => ({ id: r.id, v: stored.get(r.chunkHash) }));
  let found = 0;
  for (const q of probes) {
    const best = [];
    for (const { id, v } of data) {
      let s = 0;
      for (let i = 0; i < DIMS; i++) s += q[i] * v[i];
      if (best.length < 10 || s > best[best.length - 1].s) {
        best.push({ id, s });
        best.sort((a, b) => b.s - a.s);
        if (best.length > 10) best.pop();
      }
    }
    const truth = new Set(best.map((b) => b.id));
    found += indexes.search('bench', q, 10).filter((h) => truth.has(h.chunkId)).length;
  }
  return found / (probes.length * 10);
}

export function vectorChangeMarkdown(r) {
  const f = (x, d = 2) => x.toFixed(d);
  const c = r.change;
  return [
    `At ${r.chunks.toLocaleString('en')} chunks x ${DIMS} (store ${f(r.storeSeconds, 1)} s, HNSW build ${f(r.indexSeconds, 1)} s), service defaults, in-memory lexical engine:\n`,
    '| measure | p50 ms | p95 ms | p99 ms |',
    '|---|---:|---:|---:|',
    `| hybrid | ${f(r.hybrid.p50)} | ${f(r.hybrid.p95)} | ${f(r.hybrid.p99)} |`,
    `| hybrid, 1% metadata filter (a different group each query) | ${f(r.filtered.p50)} | ${f(r.filtered.p95)} | ${f(r.filtered.p99)} |${r.filtered.short ? ` (${r.filtered.short} short of k)` : ''}`,
    '',
    `Allowed-chunk set of a 1% filter alone: ${f(r.allowedSetMs, 3)} ms median. The filter's vector cache (filled in the background after the first filtered query) held ${r.cache.vectors.toLocaleString('en')} vectors (${f((r.cache.vectors * DIMS * 4) / 2 ** 20, 0)} MiB) after ${f(r.cache.fillMs / 1000, 2)} s.`,
    ...(r.versus
      ? [
          '',
          'Against the earlier build (same files, queries alternating between the two builds), p50 / p95 ms:',
          '',
          '| measure | earlier build | this build | p95 ratio |',
          '|---|---:|---:|---:|',
          ...Object.entries(r.versus).map(([k, v]) => `| ${k === 'hybrid' ? 'hybrid' : 'hybrid, 1% metadata filter'} | ${f(v.base.p50)} / ${f(v.base.p95)} | ${f(v.now.p50)} / ${f(v.now.p95)} | ${f(v.base.p95 / v.now.p95, 1)}x |`),
        ]
      : []),
    '',
    `One-document change (10 chunks; new and updated documents alternately; ${c.inPlace} of ${c.changes} applied in place), medians in ms:`,
    '',
    '| write + apply in place | writer saves the file | query thread starts the read | dense query during the read (old index) | read ends | longest stall of the query thread during the read | first dense query after | change to searchable |',
    '|---:|---:|---:|---:|---:|---:|---:|---:|',
    `| ${f(c.write)} | ${f(c.save, 0)} | ${f(c.start)} | ${f(c.during)} | ${f(c.load, 0)} | **${f(c.stall, 1)}** | ${f(c.query)} | **${f(c.total, 0)}** |`,
    '',
    `After ${r.churn.docs} documents updated in place: ${r.churn.tombstones} tombstones beside ${r.churn.live} live points${r.churn.compacted ? ' (compacted)' : ''}; recall@10 against exact search over every stored vector: **${f(r.churn.recall, 4)}** (${f(r.recallBefore, 4)} on the same ${r.recallQueries} probes before the updates).`,
  ].join('\n');
}

if (import.meta.url === `file://${process.argv[1]}`) {
  const chunks = Number(process.argv[2] ?? 100_000);
  const r = await runVectorChangeBench({ chunks, log: (m) => process.stderr.write(`${m}\n`) });
  process.stdout.write(`${vectorChangeMarkdown(r)}\n`);
}
