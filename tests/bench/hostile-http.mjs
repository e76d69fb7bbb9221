#!/usr/bin/env node
// Hostile inputs through the HTTP upload API of one server: a real `sourcebound serve` (defaults, hashing
// embedder, the demo seed ingested into "default" at start), each input from hostile-inputs.mjs uploaded as
// multipart to the collection "hostile" in turn, waiting for its job to end; meanwhile one client searches
// "default" without pause (POST /v1/search, hybrid, k=8, cycling the demo questions). Reports each upload's
// outcome and seconds, the server's peak resident memory (VmHWM of its /proc/<pid>/status: the whole process,
// request thread and job thread together; Linux only) and search latency while the uploads ran.
// Targets (issue 14): peak RSS < 600 MB, search p95 < 100 ms.
// Usage: npm run build && node tests/bench/hostile-http.mjs [--json]
import { spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const { INPUTS } = await import('./hostile-inputs.mjs');
const { values: args } = parseArgs({ options: { json: { type: 'boolean', default: false } } });
const MiB = 1024 * 1024;
const work = mkdtempSync(path.join(os.tmpdir(), 'sb-hostile-http-'));
const QUESTIONS = readFileSync(path.join(ROOT, 'tests', 'fixtures', 'demo-questions.jsonl'), 'utf8')
  .split('\n')
  .filter(Boolean)
  .map((l) => JSON.parse(l).question)
  .slice(0, 16);

const server = spawn(process.execPath, [path.join(ROOT, 'dist', 'cli.js'), 'serve'], {
  cwd: ROOT,
  env: { ...process.env, PORT: '0', HOST: '127.0.0.1', SOURCEBOUND_DATA_DIR: path.join(work, 'data'), SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'info' },
  stdio: ['ignore', 'pipe', 'pipe'],
});
let log = '';
server.stdout.on('data', (d) => (log += d));
server.stderr.on('data', (d) => (log += d));
const deadline = (ms, what) => {
  const end = Date.now() + ms;
  return () => {
    if (Date.now() > end) throw new Error(`timed out after ${ms} ms waiting for ${what}\n${log.slice(-2000)}`);
  };
};
const sleep = (ms) => new Promise((r) => setTimeout(r, ms));

try {
  let base;
  for (const check = deadline(120_000, 'the server to be ready'); !base; await sleep(50)) {
    check();
    if (server.exitCode !== null) throw new Error(`serve exited:\n${log}`);
    base = /ready on (http:\/\/[^\s"]+)/.exec(log)?.[1];
  }
  const status = (field) => Number(new RegExp(`${field}:\\s+(\\d+)`).exec(readFileSync(`/proc/${server.pid}/status`, 'utf8'))?.[1] ?? NaN) / 1024;
  const rssAtReady = status('VmRSS');

  // The searcher: one request at a time, for as long as the uploads run.
  let searching = true;
  const latencies = [];
  let searchErrors = 0;
  const searcher = (async () => {
    for (let i = 0; searching; i++) {
      const t = performance.now();
      const res = await fetch(`${base}/v1/search`, {
        method: 'POST',
        headers: { 'content-type': 'application/json' },
        body: JSON.stringify({ query: QUESTIONS[i % QUESTIONS.length], collection: 'default', mode: 'hybrid', k: 8 }),
      });
      await res.arrayBuffer();
      if (res.ok) latencies.push(performance.now() - t);
      else searchErrors++;
    }
  })();

  const rows = [];
  for (const [label, [name, make]] of Object.entries(INPUTS)) {
    process.stderr.write(`hostile-http: ${label}\n`);
    const bytes = Buffer.from(make());
    const form = new FormData();
    form.append('file', new Blob([bytes]), name);
    const started = performance.now();
    const res = await fetch(`${base}/v1/collections/hostile/documents`, { method: 'POST', body: form });
    const body = await res.json();
    let outcome;
    if (res.status !== 202) {
      outcome = `${res.status} ${body.error?.code ?? body.status}`;
    } else {
      for (const check = deadline(600_000, `the job of ${label}`); ; await sleep(100)) {
        check();
        const job = await (await fetch(`${base}${body.job}`)).json();
        if (job.state === 'succeeded') {
          outcome = `succeeded, ${job.result.chunks.embedded} chunks`;
          break;
        }
        if (job.state === 'failed') {
          outcome = `failed: ${job.error}`;
          break;
        }
      }
    }
    rows.push({ label, mib: bytes.length / MiB, seconds: (performance.now() - started) / 1000, outcome });
  }
  searching = false;
  await searcher;
  const health = await (await fetch(`${base}/health`)).json();
  const peak = status('VmHWM');
  const sorted = [...latencies].sort((a, b) => a - b);
  const q = (p) => sorted[Math.min(sorted.length - 1, Math.floor(p * sorted.length))];
  const result = {
    uploads: rows,
    peakRssMiB: peak,
    rssAtReadyMiB: rssAtReady,
    search: { requests: latencies.length, errors: searchErrors, p50: q(0.5), p95: q(0.95), max: sorted[sorted.length - 1] },
    queue: health.queue,
  };
  if (args.json) {
    process.stdout.write(`${JSON.stringify(result)}\n`);
  } else {
    const out = [
      '| input | file size | upload to job end s | outcome |',
      '|---|---:|---:|---|',
      ...rows.map((r) => `| ${r.label} | ${r.mib.toFixed(2)} MiB | ${r.seconds.toFixed(1)} | ${r.outcome.replace(/\|/g, '\\|')} |`),
      '',
      `server peak RSS (VmHWM, whole process): ${peak.toFixed(0)} MiB (${rssAtReady.toFixed(0)} MiB when ready; target < 600 MB)`,
      `search on "default" meanwhile: ${latencies.length} requests, ${searchErrors} errors, p50 ${q(0.5).toFixed(1)} ms, p95 ${q(0.95).toFixed(1)} ms, max ${sorted[sorted.length - 1].toFixed(1)} ms (target p95 < 100 ms)`,
      `job queue afterwards: ${health.queue?.state}, thread deaths ${health.queue?.threadDeaths}`,
    ];
    process.stdout.write(`${out.join('\n')}\n`);
  }
} finally {
  server.kill('SIGTERM');
  await new Promise((r) => (server.exitCode !== null ? r() : server.once('exit', r)));
  rmSync(work, { recursive: true, force: true });
}
