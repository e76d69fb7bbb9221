#!/usr/bin/env node
// The nightly re-index, measured on the compiled code in dist/ (run `npm run build` first):
//   1. a generated 1,000-document corpus: first ingest vs re-index of the unchanged folder (target < 5 %);
//   2. query latency while a full re-index runs in the job worker thread vs idle (target p95 <= 2x idle,
//      zero failed queries). The full re-index follows a chunker change, so every chunk is chunked and
//      embedded again and the new index is built beside the live one, then swapped in.
// Usage: node tests/bench/reindex.mjs [--docs N] [--runs N] [--json]
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { pathToFileURL } from 'node:url';
import { latencySummary, rng } from './generate.mjs';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const dist = (p) => import(pathToFileURL(path.join(ROOT, 'dist', p)).href);
const { loadConfig } = await dist('config/index.js');
const { createDocumentApi, createRuntime } = await dist('runtime.js');
const { silentLogger } = await dist('logger.js');

const median = (xs) => {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
};

// Invented policies of Marrowgate Valley Transit (the demo scenario): sections of a few paragraphs built from
// fixed phrases, numbers and places drawn from a seeded PRNG, so every run writes the same bytes.
const TOPICS = ['night buses', 'tram platforms', 'lost property', 'bicycles on board', 'season tickets', 'fare capping', 'assistance dogs', 'pushchairs', 'school services', 'depot safety', 'driver rest breaks', 'ticket refunds', 'delay repay', 'accessible boarding', 'park and ride', 'cleaning rotas'];
const PLACES = ['Quarrel Lane depot', 'Tollbridge Yard', 'Harrowgate Sidings', 'Fernhollow interchange', 'Brackenfold tram stop', 'Marrowgate bus station', 'Lowmere park and ride', 'Kestle Road garage'];
const ROLES = ['drivers', 'platform staff', 'the customer desk', 'shift leads', 'revenue inspectors', 'cleaning crews', 'the control room'];
const VERBS = ['must record', 'should check', 'are asked to confirm', 'report', 'keep a log of', 'review'];
const THINGS = ['the fault number', 'the ticket serial', 'the passenger count', 'the vehicle fleet number', 'the time of the incident', 'the route and stop'];

export function writeCorpus(dir, count, seed = 2026) {
  const rand = rng(seed);
  const pick = (xs) => xs[Math.floor(rand() * xs.length)];
  let bytes = 0;
  for (let i = 0; i < count; i++) {
    const topic = TOPICS[i % TOPICS.length];
    const sections = [];
    const nSections = 1 + Math.floor(rand() * 2);
    for (let s = 0; s < nSections; s++) {
      const paras = [];
      const nParas = 2 + Math.floor(rand() * 2);
      for (let p = 0; p < nParas; p++) {
        const sentences = [];
        const nSent = 3 + Math.floor(rand() * 2);
        for (let k = 0; k < nSent; k++) {
          sentences.push(
            `At ${pick(PLACES)}, ${pick(ROLES)} ${pick(VERBS)} ${pick(THINGS)} for ${topic} on route ${1 + Math.floor(rand() * 90)} ` +
              `within ${1 + Math.floor(rand() * 28)} days (policy ${i}, clause ${s}.${p}.${k}).`,
          );
        }
        paras.push(sentences.join(' '));
      }
      sections.push({ heading: `Section ${s + 1}: ${topic} at ${pick(PLACES)}`, paras });
    }
    const title = `Policy ${i}: ${topic}`;
    let name;
    let text;
    if (i % 10 === 7) {
      name = `policy-${String(i).padStart(4, '0')}.html`;
      text = `<html><head><title>${title}</title></head><body><h1>${title}</h1>${sections.map((s) => `<h2>${s.heading}</h2>${s.paras.map((p) => `<p>${p}</p>`).join('')}`).join('')}</body></html>\n`;
    } else if (i % 10 === 3) {
      name = `policy-${String(i).padStart(4, '0')}.txt`;
      text = `${title}\n\n${sections.map((s) => `${s.heading}\n\n${s.paras.join('\n\n')}`).join('\n\n')}\n`;
    } else {
      name = `policy-${String(i).padStart(4, '0')}.md`;
      text = `# ${title}\n\n${sections.map((s) => `## ${s.heading}\n\n${s.paras.join('\n\n')}`).join('\n\n')}\n`;
    }
    const sub = path.join(dir, `area-${i % 8}`);
    mkdirSync(sub, { recursive: true });
    writeFileSync(path.join(sub, name), text);
    bytes += Buffer.byteLength(text);
  }
  return { bytes };
}

const QUERIES = [
  'how long do refunds for delayed trams take',
  'what must drivers record after a fault at Quarrel Lane depot',
  'are assistance dogs allowed on night buses',
  'who checks the ticket serial at Tollbridge Yard',
  'bicycles on board route 12',
  'season tickets fare capping days',
  'pushchairs accessible boarding Brackenfold',
  'cleaning rotas Kestle Road garage',
  'park and ride Lowmere passenger count',
  'driver rest breaks control room log',
];

export async function timeQueries({ rt, collection, until, min, pauseMs }) {
  const latencies = [];
  let failures = 0;
  let i = 0;
  for (;;) {
    if (until ? until() && latencies.length + failures >= min : latencies.length + failures >= min) break;
    const query = QUERIES[i++ % QUERIES.length];
    const t0 = performance.now();
    try {
      const hits = await rt.retriever.search({ query, collection, k: 10, mode: 'hybrid' });
      if (hits.length === 0) throw new Error('no hits');
      latencies.push(performance.now() - t0);
    } catch {
      failures++;
    }
    await new Promise((r) => setTimeout(r, pauseMs));
  }
  return { ...latencySummary(latencies), count: latencies.length, failures };
}

export async function runReindexBench({ docs = 1000, runs = 5, log = () => {} } = {}) {
  const work = mkdtempSync(path.join(os.tmpdir(), 'sb-bench-reindex-'));
  try {
    const folder = path.join(work, 'docs');
    const { bytes } = writeCorpus(folder, docs);
    const dataDir = path.join(work, 'data');
    const config = (chunking) =>
      loadConfig({
        env: {},
        overrides: { dataDir, embedding: { provider: 'hashing', modelDir: path.join(work, 'models') }, logLevel: 'warn', ...(chunking ? { chunking } : {}) },
      });

    // 1. First ingest, then re-indexes of the unchanged folder (each after a fresh runtime, as the nightly
    //    command starts cold; the runtime's start-up is timed apart).
    log(`ingesting ${docs} documents`);
    let rt = await createRuntime(config(), silentLogger());
    let t0 = performance.now();
    const first = await rt.ingestor.ingestPath(folder, { collection: 'policies' });
    const ingestSeconds = (performance.now() - t0) / 1000;
    rt.close();
    if (first.documents.failed > 0) throw new Error(`ingest failed: ${JSON.stringify(first.failures.slice(0, 3))}`);
    const reindexSeconds = [];
    const startupSeconds = [];
    let unchanged;
    for (let r = 0; r < runs; r++) {
      t0 = performance.now();
      rt = await createRuntime(config(), silentLogger());
      startupSeconds.push((performance.now() - t0) / 1000);
      t0 = performance.now();
      unchanged = await rt.ingestor.reindex({ collection: 'policies' });
      reindexSeconds.push((performance.now() - t0) / 1000);
      rt.close();
      if (unchanged.documents.unchanged !== docs || unchanged.chunks.embedded !== 0) throw new Error(`not unchanged: ${JSON.stringify(unchanged.documents)}`);
    }
    log(`re-index of the unchanged folder: median ${median(reindexSeconds).toFixed(3)} s`);

    // 2. Queries while a full re-index runs in the job worker thread. The service runtime and the worker use
    //    the new chunker settings; the stored chunks were made with the old ones, so the re-index is full.
    const changed = { targetTokens: 120, maxTokens: 200, overlapTokens: 24 };
    const cfg = config(changed);
    rt = await createRuntime(cfg, silentLogger());
    const { queue, documents: service } = createDocumentApi(rt, 'thread');
    const pauseMs = 10;
    // Warm-up: load the index, JIT the query path.
    await timeQueries({ rt, collection: 'policies', min: 20, pauseMs });
    log('idle queries');
    const idle = await timeQueries({ rt, collection: 'policies', min: 200, pauseMs });
    const before = rt.repo.getCollection('policies');
    log('queries during a full re-index in the worker thread');
    const job = service.reindex({ collection: 'policies' });
    let done = false;
    const started = performance.now();
    const finished = queue.idle().then(() => {
      done = true;
    });
    const during = await timeQueries({ rt, collection: 'policies', until: () => done, min: 100, pauseMs });
    await finished;
    const fullSeconds = (performance.now() - started) / 1000;
    const result = rt.jobs.get(job.id);
    await queue.close();
    const after = rt.repo.getCollection('policies');
    rt.close();
    if (result.state !== 'succeeded') throw new Error(`re-index job ${result.state}: ${result.error}`);
    return {
      docs,
      corpusBytes: bytes,
      chunks: first.chunks.embedded + first.chunks.reused,
      ingestSeconds,
      reindexSeconds: median(reindexSeconds),
      reindexRuns: reindexSeconds,
      startupSeconds: median(startupSeconds),
      ratio: median(reindexSeconds) / ingestSeconds,
      full: {
        seconds: fullSeconds,
        summary: result.result,
        chunksBefore: before.chunks,
        chunksAfter: after.chunks,
        idle,
        during,
        p95Ratio: during.p95 / idle.p95,
        pauseMs,
      },
    };
  } finally {
    rmSync(work, { recursive: true, force: true });
  }
}

export function reindexMarkdown(r) {
  const f = (x, d = 2) => x.toFixed(d);
  const lines = [];
  lines.push(`Corpus: ${r.docs.toLocaleString('en')} generated policy documents (Markdown, HTML, text; ${f(r.corpusBytes / 2 ** 20, 1)} MiB, ${r.chunks.toLocaleString('en')} chunks), hashing embedder (4,096 dimensions).\n`);
  lines.push('| step | seconds | share of first ingest |');
  lines.push('|---|---:|---:|');
  lines.push(`| first ingest (load, chunk, embed, SQLite, HNSW) | ${f(r.ingestSeconds)} | 100 % |`);
  lines.push(`| re-index, nothing changed (median of ${r.reindexRuns.length} cold runs) | ${f(r.reindexSeconds, 3)} | ${f(100 * r.ratio, 1)} % |`);
  lines.push(`| (runtime start-up before each re-index, not counted above) | ${f(r.startupSeconds, 3)} | |`);
  const q = r.full;
  lines.push(
    `\nQueries (hybrid, k = 10, one at a time with ${q.pauseMs} ms between) against the live collection, idle and while a full re-index ` +
      `(chunker settings changed: ${q.summary.chunks.embedded.toLocaleString('en')} chunks embedded, ${q.chunksBefore.toLocaleString('en')} → ${q.chunksAfter.toLocaleString('en')} chunks, ${f(q.seconds, 1)} s) ` +
      'ran in the job worker thread and was swapped in:\n',
  );
  lines.push('| | queries | failed | p50 ms | p95 ms | p99 ms |');
  lines.push('|---|---:|---:|---:|---:|---:|');
  lines.push(`| idle | ${q.idle.count} | ${q.idle.failures} | ${f(q.idle.p50)} | ${f(q.idle.p95)} | ${f(q.idle.p99)} |`);
  lines.push(`| during the full re-index | ${q.during.count} | ${q.during.failures} | ${f(q.during.p50)} | ${f(q.during.p95)} | ${f(q.during.p99)} |`);
  lines.push(`\np95 during / idle: ${f(q.p95Ratio)}× (target ≤ 2×); failed queries: ${q.during.failures} (target 0).`);
  return lines.join('\n');
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const { values } = parseArgs({ options: { docs: { type: 'string', default: '1000' }, runs: { type: 'string', default: '5' }, json: { type: 'boolean', default: false } } });
  const r = await runReindexBench({ docs: Number(values.docs), runs: Number(values.runs), log: (m) => process.stderr.write(`${m}\n`) });
  process.stdout.write(values.json ? `${JSON.stringify(r, null, 2)}\n` : `${reindexMarkdown(r)}\n`);
}
