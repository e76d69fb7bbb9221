#!/usr/bin/env node
// Hostile inputs through the HTTP upload API of one server: a real `sourcebound serve` (defaults, hashing
// embedder, the demo seed ingested into "default" at start), each input from hostile-inputs.mjs uploaded as
// multipart to the collection "hostile" in turn, waiting for its job to end; meanwhile one client searches
// "default" without pause (POST /v1/search, hybrid, k=8, cycling the demo questions). Reports each upload's
// outcome and seconds, the server's peak resident memory (VmHWM of its /proc/<pid>/status: the whole process,
// request thread and job thread together; Linux only) and search latency while the uploads ran. After each upload's
// job ends, one search of "hostile" itself (as a real service is asked about what it was just given): once the
// accepted prose is in, the request thread then holds that collection's vector graph, and the peak includes it.
// Targets (issue 14): peak RSS < 600 MB, search p95 < 100 ms.
// Usage: npm run build && node tests/bench/hostile-http.mjs [--json] [--server-node-option=FLAG ...]
// (--server-node-option passes a flag to the server's node only, e.g. --server-node-option=--max-old-space-size=192)
import { spawn } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const { INPUTS } = await import('./hostile-inputs.mjs');
const { values: args } = parseArgs({
  options: { json: { type: 'boolean', default: false }, 'server-node-option': { type: 'string', multiple: true, default: [] } },
});
const MiB = 1024 * 1024;
const work = mkdtempSync(path.join(os.tmpdir(), 'sb-hostile-http-'));
const QUESTIONS = readFileSync(path.join(ROOT, 'tests', 'fixtures', 'demo-questions.jsonl'), 'utf8')
  .split('\n')
  .filter(Boolean)
  .map((l) => JSON.parse(l).question)
  .slice(0, 16);

// The rate limit raised (as in load.mjs), or the searcher, which never pauses, would be refused after 600 a minute.
const configFile = path.join(work, 'config.json');
writeFileSync(configFile, JSON.stringify({ limits: { rateLimitPerMinute: 10_000_000 } }));
const server = spawn(process.execPath, [...args['server-node-option'], path.join(ROOT, 'dist', 'cli.js'), 'serve'], {
  cwd: ROOT,
  env: {
    ...process.env,
    PORT: '0',
    HOST: '127.0.0.1',
    SOURCEBOUND_CONFIG: configFile,
    SOURCEBOUND_DATA_DIR: path.join(work, 'data'),
    SOURCEBOUND_EMBEDDER: 'hashing',
    SOURCEBOUND_LOG_LEVEL: 'info',
  },
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
  // Anonymous and file-backed resident memory, sampled every 200 ms (the kernel keeps no peak of either): what
  // varies between runs is mostly anonymous memory; file-backed is the binary and database pages read through a map.
  const split = { anon: 0, file: 0 };
  const sampler = setInterval(() => {
    try {
      split.anon = Math.max(split.anon, status('RssAnon'));
      split.file = Math.max(split.file, status('RssFile'));
    } catch {
      // The server has gone; the run reports that below.
    }
  }, 200);

  // Every input is made before the searcher starts: making them (a 400 MiB string for one ZIP bomb) would
  // otherwise hold up this process's own event loop and count as search latency.
  const made = Object.entries(INPUTS).map(([label, [name, make]]) => [label, name, Buffer.from(make())]);

  // The searcher: one request at a time, for as long as the uploads run.
  let searching = true;
  const latencies = [];
  let searchErrors = 0;
  let firstSearchError = null;
  const searcher = (async () => {
    for (let i = 0; searching; i++) {
      const t = performance.now();
      try {
        const res = await fetch(`${base}/v1/search`, {
          method: 'POST',
          headers: { 'content-type': 'application/json' },
          body: JSON.stringify({ query: QUESTIONS[i % QUESTIONS.length], collection: 'default', mode: 'hybrid', k: 8 }),
        });
        await res.arrayBuffer();
        if (res.ok) latencies.push(performance.now() - t);
        else {
          searchErrors++;
          firstSearchError ??= `HTTP ${res.status}`;
        }
      } catch (err) {
        // Counted, with the first reason kept; a server that died ends the run below.
        searchErrors++;
        firstSearchError ??= `${err.message}: ${err.cause?.code ?? ''}`;
        if (server.exitCode !== null) break;
      }
    }
  })();

  const rows = [];
  for (const [label, name, bytes] of made) {
    process.stderr.write(`hostile-http: ${label}\n`);
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
    const seconds = (performance.now() - started) / 1000;
    const peakAtJobEndMiB = status('VmHWM');
    const askedAt = performance.now();
    const asked = await fetch(`${base}/v1/search`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ query: QUESTIONS[rows.length % QUESTIONS.length], collection: 'hostile', mode: 'hybrid', k: 8 }),
    });
    const hits = (await asked.json()).results?.length;
    const hostileSearch = `${asked.status}, ${hits ?? 0} results, ${(performance.now() - askedAt).toFixed(0)} ms`;
    rows.push({ label, mib: bytes.length / MiB, seconds, outcome, peakAtJobEndMiB, hostileSearch, peakSoFarMiB: status('VmHWM') });
  }
  searching = false;
  await searcher;
  clearInterval(sampler);
  if (server.exitCode !== null || server.signalCode !== null) throw new Error(`the server died (${server.exitCode ?? server.signalCode}):\n${log.slice(-3000)}`);
  const health = await (await fetch(`${base}/health`)).json();
  const peak = status('VmHWM');
  const sorted = [...latencies].sort((a, b) => a - b);
  const q = (p) => sorted[Math.min(sorted.length - 1, Math.floor(p * sorted.length))];
  const result = {
    uploads: rows,
    peakRssMiB: peak,
    rssAtReadyMiB: rssAtReady,
    sampledPeakAnonMiB: split.anon,
    sampledPeakFileMiB: split.file,
    search: { requests: latencies.length, errors: searchErrors, firstError: firstSearchError, p50: q(0.5), p95: q(0.95), max: sorted[sorted.length - 1] },
    queue: health.queue,
  };
  if (args.json) {
    process.stdout.write(`${JSON.stringify(result)}\n`);
  } else {
    const out = [
      '| input | file size | upload to job end s | outcome | peak RSS at job end MiB | then a search of "hostile" | peak RSS after it MiB |',
      '|---|---:|---:|---|---:|---|---:|',
      ...rows.map((r) => `| ${r.label} | ${r.mib.toFixed(2)} MiB | ${r.seconds.toFixed(1)} | ${r.outcome.replace(/\|/g, '\\|')} | ${r.peakAtJobEndMiB.toFixed(0)} | ${r.hostileSearch} | ${r.peakSoFarMiB.toFixed(0)} |`),
      '',
      `server peak RSS (VmHWM, whole process): ${peak.toFixed(0)} MiB (${rssAtReady.toFixed(0)} MiB when ready; target < 600 MB)`,
      `sampled every 200 ms: at most ${split.anon.toFixed(0)} MiB anonymous (RssAnon), ${split.file.toFixed(0)} MiB file-backed (RssFile)`,
      `search on "default" meanwhile: ${latencies.length} requests, ${searchErrors} errors${firstSearchError ? ` (first: ${firstSearchError})` : ''}, p50 ${q(0.5).toFixed(1)} ms, p95 ${q(0.95).toFixed(1)} ms, max ${sorted[sorted.length - 1].toFixed(1)} ms (target p95 < 100 ms)`,
      `job queue afterwards: ${health.queue?.state}, thread deaths ${health.queue?.threadDeaths}`,
    ];
    process.stdout.write(`${out.join('\n')}\n`);
  }
} finally {
  server.kill('SIGTERM');
  await new Promise((r) => (server.exitCode !== null ? r() : server.once('exit', r)));
  rmSync(work, { recursive: true, force: true });
}
