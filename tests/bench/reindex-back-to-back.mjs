#!/usr/bin/env node
// Searches while full re-indexes run back to back (issue 15), measured on the compiled code in dist/ (run
// `npm run build` first). Two collections of generated policies (writeCorpus in reindex.mjs, two seeds):
// "policies", which is searched throughout, and "other". Hybrid searches of "policies" (k = 10, one at a time
// with 10 ms between) are timed idle, then while `--runs` full re-indexes of "other" run one after another in
// the job worker thread, then while as many full re-indexes of "policies" itself run and are swapped in.
// Target: p95 during each ≤ 1.5× idle, no failed search.
// The searches and corpus are reindex.mjs's.
// Usage: node tests/bench/reindex-back-to-back.mjs [--docs N] [--runs N] [--json]
import { mkdtempSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { pathToFileURL } from 'node:url';
import { timeQueries, writeCorpus } from './reindex.mjs';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const dist = (p) => import(pathToFileURL(path.join(ROOT, 'dist', p)).href);
const { loadConfig } = await dist('config/index.js');
const { createDocumentApi, createRuntime } = await dist('runtime.js');
const { silentLogger } = await dist('logger.js');

export async function runBackToBack({ docs = 1000, runs = 3, log = () => {} } = {}) {
  const work = mkdtempSync(path.join(os.tmpdir(), 'sb-bench-b2b-'));
  try {
    writeCorpus(path.join(work, 'policies'), docs, 2026);
    writeCorpus(path.join(work, 'other'), docs, 7);
    const cfg = loadConfig({ env: {}, overrides: { dataDir: path.join(work, 'data'), embedding: { provider: 'hashing', modelDir: path.join(work, 'models') }, logLevel: 'warn' } });
    const rt = await createRuntime(cfg, silentLogger());
    log(`ingesting 2 × ${docs} documents`);
    for (const c of ['policies', 'other']) {
      const r = await rt.ingestor.ingestPath(path.join(work, c), { collection: c });
      if (r.documents.failed > 0) throw new Error(`ingest of ${c} failed`);
    }
    const { queue, documents } = createDocumentApi(rt, 'thread');
    const pauseMs = 10;
    // As `serve` does before it says it is ready: the in-memory lexical index built, then the query path warmed.
    await rt.lexicalIndex?.whenReady();
    await timeQueries({ rt, collection: 'policies', min: 100, pauseMs });
    log('idle searches');
    const idle = await timeQueries({ rt, collection: 'policies', min: 300, pauseMs });
    const phase = async (collection) => {
      log(`searches during ${runs} back-to-back full re-indexes of ${collection}`);
      let done = false;
      const seconds = [];
      const jobs = (async () => {
        for (let r = 0; r < runs; r++) {
          const t0 = performance.now();
          const job = documents.reindex({ collection, full: true });
          await queue.idle();
          const rec = rt.jobs.get(job.id);
          if (rec.state !== 'succeeded') throw new Error(`re-index of ${collection}: ${rec.state} ${rec.error}`);
          seconds.push((performance.now() - t0) / 1000);
        }
      })().finally(() => (done = true));
      const during = await timeQueries({ rt, collection: 'policies', until: () => done, min: 100, pauseMs });
      await jobs;
      return { collection, seconds, ...during, p95Ratio: during.p95 / idle.p95 };
    };
    const other = await phase('other');
    const same = await phase('policies');
    await queue.close();
    const chunks = rt.repo.getCollection('policies').chunks;
    rt.close();
    return { docs, runs, chunks, pauseMs, idle, other, same };
  } finally {
    rmSync(work, { recursive: true, force: true });
  }
}

export function backToBackMarkdown(r) {
  const f = (x, d = 2) => x.toFixed(d);
  const row = (name, s) => `| ${name} | ${s.count} | ${s.failures} | ${f(s.p50)} | ${f(s.p95)} | ${f(s.p99)} | ${s.p95Ratio === undefined ? '' : `${f(s.p95Ratio)}×`} |`;
  const secs = (s) => s.seconds.map((x) => f(x, 1)).join(', ');
  return [
    `Two collections of ${r.docs.toLocaleString('en')} generated policies each ("policies": ${r.chunks.toLocaleString('en')} chunks), hashing embedder; hybrid searches of "policies", k = 10, one at a time with ${r.pauseMs} ms between.\n`,
    '| searches of "policies" | searches | failed | p50 ms | p95 ms | p99 ms | p95 / idle |',
    '|---|---:|---:|---:|---:|---:|---:|',
    row('idle', r.idle),
    row(`during ${r.runs} back-to-back full re-indexes of "other" (${secs(r.other)} s)`, r.other),
    row(`during ${r.runs} back-to-back full re-indexes of "policies" itself (${secs(r.same)} s)`, r.same),
    '\nTarget: p95 ≤ 1.5× idle in both, no failed search.',
  ].join('\n');
}

if (import.meta.url === pathToFileURL(process.argv[1] ?? '').href) {
  const { values } = parseArgs({ options: { docs: { type: 'string', default: '1000' }, runs: { type: 'string', default: '3' }, json: { type: 'boolean', default: false } } });
  const r = await runBackToBack({ docs: Number(values.docs), runs: Number(values.runs), log: (m) => process.stderr.write(`${m}\n`) });
  process.stdout.write(values.json ? `${JSON.stringify(r, null, 2)}\n` : `${backToBackMarkdown(r)}\n`);
}
