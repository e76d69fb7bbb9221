#!/usr/bin/env node
// Load benchmark for issue "safe to expose": the demo corpus grown to about 10k chunks (copies of the
// seed documents under new names), a real `sourcebound serve` process, and autocannon (a well-kept HTTP
// load generator from the registry) against POST /v1/search (hybrid) and extractive POST /v1/answer.
// Usage: npm run build && node tests/bench/load.mjs [--seconds 20] [--connections 8] [--json] [--cpu-prof DIR]
// (--cpu-prof: the server writes a V8 CPU profile of the whole run into DIR when it stops.)
import { spawn } from 'node:child_process';
import { cpSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { pathToFileURL } from 'node:url';
import autocannon from 'autocannon';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const dist = (p) => import(pathToFileURL(path.join(ROOT, 'dist', p)).href);
const { loadConfig } = await dist('config/index.js');
const { createRuntime } = await dist('runtime.js');
const { silentLogger } = await dist('logger.js');

const { values: args } = parseArgs({
  options: {
    seconds: { type: 'string', default: '20' },
    connections: { type: 'string', default: '8' },
    chunks: { type: 'string', default: '10000' },
    json: { type: 'boolean', default: false },
    'cpu-prof': { type: 'string' },
  },
});
const SEED = path.join(ROOT, 'seed-docs');
const work = mkdtempSync(path.join(os.tmpdir(), 'sb-load-'));
const docs = path.join(work, 'docs');
const dataDir = path.join(work, 'data');
mkdirSync(docs);

// Grow the corpus: one copy of the seed documents tells how many chunks a copy makes; then enough numbered
// copies are written and ingested in one run (one index save, as the nightly re-index would).
const env = { SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'warn' };
const cfg = loadConfig({ env, overrides: { seed: { ingestOnEmpty: false } } });
const rt = await createRuntime(cfg, silentLogger(), { processMetrics: false });
const seedFiles = readdirSync(SEED).filter((f) => /\.(md|html|txt|pdf)$/.test(f));
const copyTo = (n) => {
  const dir = path.join(docs, `branch-${String(n).padStart(3, '0')}`);
  mkdirSync(dir);
  // Each copy differs by a line naming its branch, so no two documents share a content hash.
  for (const f of seedFiles) {
    if (f.endsWith('.pdf')) cpSync(path.join(SEED, f), path.join(dir, f));
    else writeFileSync(path.join(dir, f), readFileSync(path.join(SEED, f), 'utf8') + `\n\nBranch copy ${n}.\n`);
  }
};
const started = performance.now();
copyTo(0);
await rt.ingestor.ingestPath(docs, { collection: 'default' });
const perCopy = rt.repo.getCollection('default').chunks;
const copies = Math.ceil(Number(args.chunks) / perCopy);
for (let n = 1; n < copies; n++) copyTo(n);
await rt.ingestor.ingestPath(docs, { collection: 'default' });
const chunks = rt.repo.getCollection('default').chunks;
const copy = copies;
const ingestSeconds = (performance.now() - started) / 1000;
rt.close();

const configFile = path.join(work, 'config.json');
writeFileSync(configFile, JSON.stringify({ limits: { rateLimitPerMinute: 10_000_000 }, seed: { ingestOnEmpty: false } }));
const profile = args['cpu-prof'] ? ['--cpu-prof', '--cpu-prof-dir', path.resolve(args['cpu-prof'])] : [];
const server = spawn(process.execPath, [...profile, path.join(ROOT, 'dist', 'cli.js'), 'serve', '--log', 'json'], {
  // The server logs at info, as deployed (the ready line is read from it; request logs are drained).
  env: { ...process.env, ...env, SOURCEBOUND_LOG_LEVEL: 'info', PORT: '0', SOURCEBOUND_CONFIG: configFile },
  stdio: ['ignore', 'inherit', 'pipe'],
});
// Never leave the server behind, whatever way this script ends.
process.on('exit', () => server.kill('SIGKILL'));
for (const sig of ['SIGINT', 'SIGTERM']) process.on(sig, () => process.exit(130));
const base = await new Promise((resolve, reject) => {
  let out = '';
  let ready = false;
  server.stderr.on('data', (d) => {
    if (ready) return; // request logs after start-up are read and dropped
    out += d;
    const m = /"msg":"ready on (http:\/\/[^"]+)"/.exec(out);
    if (m) {
      ready = true;
      out = '';
      resolve(m[1]);
    }
  });
  server.on('exit', (c) => reject(new Error(`server exited ${c}`)));
});

const questions = [
  'How long do I have to make a claim for a delay refund?',
  'Can I take a folding bike on the tram at peak times?',
  'What is the adult fare for a Day Rider?',
  'How long are found items kept?',
  'Can I bring an assistance dog?',
  'What protective equipment is needed in the depot yard?',
  'How do I complain about a driver?',
  'Who can get a concession pass?',
];
async function run(name, url, bodies) {
  const result = await autocannon({
    url: `${base}${url}`,
    connections: Number(args.connections),
    duration: Number(args.seconds),
    requests: bodies.map((b) => ({ method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(b) })),
  });
  if (result.non2xx > 0) console.error(`${name}: ${result.non2xx} non-2xx replies`, result.statusCodeStats);
  return {
    name,
    requestsPerSecond: Math.round(result.requests.average * 10) / 10,
    p50ms: result.latency.p50,
    p99ms: result.latency.p99,
    requests: result.requests.total,
    errors: result.errors + result.timeouts + result.non2xx,
  };
}
// A short warm-up so JIT and page cache do not count against the first scenario.
await run('warm-up', '/v1/search', [{ query: 'refund' }]).catch(() => null);
const rows = [
  await run('POST /v1/search (hybrid, k=8)', '/v1/search', questions.map((q) => ({ query: q, mode: 'hybrid' }))),
  await run('POST /v1/answer (extractive)', '/v1/answer', questions.map((q) => ({ question: q, mode: 'extractive' }))),
];
server.kill('SIGTERM');
await new Promise((r) => server.on('exit', r));
rmSync(work, { recursive: true, force: true });

const machine = `${os.cpus().length} × ${os.cpus()[0]?.model ?? 'cpu'}, ${Math.round(os.totalmem() / 2 ** 30)} GiB, Node ${process.version}`;
if (args.json) {
  console.log(JSON.stringify({ machine, chunks, copies: copy, ingestSeconds, connections: Number(args.connections), seconds: Number(args.seconds), rows }));
} else {
  console.log(`Load: ${chunks} chunks (${copy} copies of the demo corpus, hashing embedder), ${args.connections} connections, ${args.seconds} s per scenario`);
  console.log(`machine: ${machine}`);
  console.log('| scenario | requests/s | p50 ms | p99 ms | requests | errors |');
  console.log('|---|---:|---:|---:|---:|---:|');
  for (const r of rows) console.log(`| ${r.name} | ${r.requestsPerSecond} | ${r.p50ms} | ${r.p99ms} | ${r.requests} | ${r.errors} |`);
}
