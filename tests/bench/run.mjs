// npm run bench: retrieval latency at 10k and 100k chunks, HNSW recall against exact search at 100k x 384, re-index,
// ingest throughput, the HTTP load test, hostile inputs, the vector and the lexical index changed in place
// (`npm run bench -- <part>` runs one part: latency, hnsw, reindex, ingest, cranfield, load, hostile, hostile-http,
// vector, lexical).
// Prints Markdown tables for docs/benchmarks.md and writes the recall/latency chart next to it.
import { execFileSync } from 'node:child_process';
import { writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { runHnswBench } from './hnsw-recall.mjs';
import { runLatencyBench } from './retrieval-latency.mjs';
import { recallChart } from './chart.mjs';
import { reindexMarkdown, runReindexBench } from './reindex.mjs';
import { backToBackMarkdown, runBackToBack } from './reindex-back-to-back.mjs';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const log = (m) => process.stderr.write(`${m}\n`);
const f = (x, d = 2) => x.toFixed(d);
const only = process.argv[2];

const out = [];
out.push(`Machine: ${os.cpus()[0]?.model ?? 'unknown'} x ${os.cpus().length}, ${f(os.totalmem() / 2 ** 30, 0)} GiB, Node ${process.version}, ${os.platform()}`);

if (!only || only === 'latency') {
  const settings = [{ label: 'defaults (RM3 on)', tuning: {} }, { label: 'RM3 off', tuning: { rm3: null } }];
  for (const chunks of [10_000, 100_000]) {
    log(`latency at ${chunks} chunks`);
    const r = await runLatencyBench({ chunks, log, settings, queries: chunks > 50_000 ? 200 : 500 });
    if (r.lexicalIndex) {
      const x = r.lexicalIndex;
      out.push(`\nIn-memory lexical index at ${chunks.toLocaleString('en')} chunks: ${x.terms} terms, ${x.postings} postings, built in ${f(x.seconds, 1)} s, typed arrays ${f(x.arrayMiB, 0)} MiB, resident memory growth ${f(x.rssGrowthMiB, 0)} MiB.`);
    }
    for (const [label, results] of Object.entries(r.results)) {
      out.push(`\n### ${chunks.toLocaleString('en')} chunks, ${label} (store ${f(r.storeSeconds, 1)} s, HNSW build ${f(r.indexSeconds, 1)} s, ${r.queries} queries)\n`);
      out.push('| mode | p50 ms | p95 ms | p99 ms | queries/s |');
      out.push('|---|---:|---:|---:|---:|');
      for (const [mode, s] of Object.entries(results)) out.push(`| ${mode} | ${f(s.p50)} | ${f(s.p95)} | ${f(s.p99)} | ${f(s.qps, 0)} |${s.short !== undefined ? ` (${s.short} short of k)` : ''}`);
    }
  }
}
if (!only || only === 'hnsw') {
  const h = await runHnswBench({ log });
  out.push(`\n### HNSW, ${h.count.toLocaleString('en')} x ${h.dims}, M=${h.build.m}, efConstruction=${h.build.efConstruction}\n`);
  out.push(`Build ${f(h.build.seconds, 1)} s (one thread), index file ${f(h.build.fileBytes / 2 ** 20, 0)} MiB, resident memory growth ${f(h.build.rssGrowth / 2 ** 20, 0)} MiB.\n`);
  out.push('| efSearch | recall@10 | p50 ms | p95 ms | p99 ms | queries/s |');
  out.push('|---:|---:|---:|---:|---:|---:|');
  for (const r of h.byEf) out.push(`| ${r.ef} | ${f(r.recall, 4)} | ${f(r.p50, 3)} | ${f(r.p95, 3)} | ${f(r.p99, 3)} | ${f(r.qps, 0)} |`);
  out.push('\nSweep at 20,000 vectors:\n');
  out.push('| M | efConstruction | build s | efSearch | recall@10 | p95 ms |');
  out.push('|---:|---:|---:|---:|---:|---:|');
  for (const r of h.sweep) out.push(`| ${r.m} | ${r.efConstruction} | ${f(r.buildSeconds, 1)} | ${r.ef} | ${f(r.recall, 4)} | ${f(r.p95, 3)} |`);
  writeFileSync(path.join(root, 'docs', 'benchmarks-hnsw-recall.svg'), recallChart(h.byEf));
  out.push('\nChart written to docs/benchmarks-hnsw-recall.svg');
}
if (!only || only === 'reindex') {
  log('re-index: 1,000 generated documents');
  const r = await runReindexBench({ docs: 1000, runs: 5, log });
  out.push('\n### Re-index\n');
  out.push(reindexMarkdown(r));
  log('searches during back-to-back full re-indexes');
  const b = await runBackToBack({ docs: 1000, runs: 3, log });
  out.push('\n### Searches during back-to-back full re-indexes\n');
  out.push(backToBackMarkdown(b));
}
// The ingest and load benchmarks are scripts of their own (each can also be run alone); their Markdown joins this report.
for (const [part, script, flags = []] of [
  ['ingest', 'ingest.mjs'],
  ['cranfield', 'ingest-cranfield.mjs'],
  ['load', 'load.mjs'],
  ['hostile', 'hostile.mjs'],
  ['hostile-http', 'hostile-http.mjs'],
  ['vector', 'vector-change.mjs', ['--expose-gc']],
  ['lexical', 'lexical-change.mjs', ['--expose-gc']],
]) {
  if (only && only !== part) continue;
  log(`${part}: tests/bench/${script}`);
  const titles = {
    ingest: 'Ingest',
    cranfield: 'Ingest, Cranfield as text files',
    load: 'Load',
    hostile: 'Hostile inputs',
    'hostile-http': 'Hostile inputs through the upload API',
    vector: 'Vector index changed in place',
    lexical: 'Lexical index during changes',
  };
  out.push(`\n### ${titles[part]}\n`);
  out.push(execFileSync(process.execPath, [...flags, path.join(root, 'tests', 'bench', script)], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'], maxBuffer: 64 * 2 ** 20 }).trim());
}
process.stdout.write(`${out.join('\n')}\n`);
