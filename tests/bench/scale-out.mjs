// One API node on the PostgreSQL back end, on the compiled code in dist/ (run `npm run build` first), against a
// PostgreSQL server (default: the local one with trust auth; SOURCEBOUND_TEST_PG_URL to change):
//   - start-up: the node started on an empty data folder (copies every document from the database) and again on
//     the data folder it left (its snapshot: catches up from the position it recorded), timed from spawn to its
//     "ready on" line;
//   - change-to-searchable: a document written to the database (replaceDocument, as a worker does) until a search
//     on the node finds it, timed from the commit;
//   - queries per second of one node: concurrent POST /v1/search from this process, for a fixed time;
//   - how long the node's event loop is held during each start-up: /health asked every 100 ms from spawn to the
//     ready line, the slowest reply kept (an orchestrator's liveness probe asks the same).
//
//   npm run build && node tests/bench/scale-out.mjs [--chunks 20000] [--dims 384] [--changes 30] [--seconds 10]
//     [--concurrency 4] [--cli dist/cli.js] [--json]
//
// The corpus is synthetic (generate.mjs: an invented vocabulary, Zipf-distributed words), 20 chunks a document,
// with vectors of the hashing embedder at --dims dimensions, which the node also runs. It creates a database of
// its own and drops it at the end.
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import pg from 'pg';
import { createHashingEmbedder } from '../../dist/embed/index.js';
import { openPgSystemOfRecord } from '../../dist/store/pg/index.js';
import { percentile, rng, vocabulary, zipfSampler } from './generate.mjs';

const { values: args } = parseArgs({
  options: {
    chunks: { type: 'string', default: '20000' },
    dims: { type: 'string', default: '384' },
    changes: { type: 'string', default: '30' },
    seconds: { type: 'string', default: '10' },
    concurrency: { type: 'string', default: '4' },
    cli: { type: 'string', default: '' },
    json: { type: 'boolean', default: false },
  },
});
const CHUNKS = Number(args.chunks);
const DIMS = Number(args.dims);
const PER_DOC = 20;
const ROOT = path.resolve(import.meta.dirname, '..', '..');
// `--cli` runs another build's CLI (say, a copy of dist/ from an earlier commit) against the same data, for a before/after in one sitting.
const CLI = args.cli ? path.resolve(args.cli) : path.join(ROOT, 'dist', 'cli.js');
const ADMIN = process.env.SOURCEBOUND_TEST_PG_URL ?? 'postgres://postgres@127.0.0.1:5432/postgres';

const admin = async (sql) => {
  const c = new pg.Client({ connectionString: ADMIN });
  await c.connect();
  try {
    await c.query(sql);
  } finally {
    await c.end();
  }
};
const median = (xs) => percentile([...xs].sort((a, b) => a - b), 50);

const dbName = `sb_bench_${process.pid}`;
await admin(`CREATE DATABASE ${dbName}`);
const url = new URL(ADMIN);
url.pathname = `/${dbName}`;
const work = mkdtempSync(path.join(tmpdir(), 'sb-scale-bench-'));
const embedder = createHashingEmbedder({ dimensions: DIMS });
const sor = await openPgSystemOfRecord(url.toString(), { max: 4 });
const words = vocabulary(20000);
const rand = rng(5);
const zipf = zipfSampler(words.length, rand);
const sentence = (n) => Array.from({ length: n }, () => words[zipf()]).join(' ');

/** A document of PER_DOC chunks of about 120 words each, with its vectors. */
async function makeDocument(i, extra = '') {
  const parts = Array.from({ length: PER_DOC }, (_, k) => `${k === 0 ? extra : ''}${sentence(120)}.`);
  const text = parts.join('\n\n');
  let at = 0;
  const chunks = parts.map((p, k) => {
    const c = { ordinal: k, text: p, start: at, end: at + p.length, headingPath: [`Part ${k + 1}`], pageStart: null, pageEnd: null, tokenCount: 120, chunkHash: createHash('sha256').update(`${i}:${p}`).digest('hex') };
    at += p.length + 2;
    return c;
  });
  const out = await embedder.embed(chunks.map((c) => c.text));
  const vectors = new Map(chunks.map((c, k) => [c.chunkHash, out[k]]));
  const doc = {
    id: `bench-${i}`, collection: 'default', source: `doc-${i}.md`, root: null, title: `Document ${i}`, format: 'markdown',
    contentHash: createHash('sha256').update(text).digest('hex'), byteSize: text.length, pageCount: null, effectiveDate: null,
    metadata: {}, settingsKey: 'bench', text,
  };
  return { doc, chunks, vectors };
}

const fill0 = performance.now();
for (let i = 0; i < CHUNKS / PER_DOC; i++) {
  const d = await makeDocument(i);
  await sor.replaceDocument(d.doc, d.chunks, d.vectors, embedder.id);
}
const fillSeconds = (performance.now() - fill0) / 1000;

const config = path.join(work, 'config.json');
// The per-client rate limit is lifted: this process is every client.
writeFileSync(config, JSON.stringify({ storage: { backend: 'postgres', followPollMs: 1000 }, embedding: { hashingDimensions: DIMS }, limits: { rateLimitPerMinute: 10_000_000 } }));
const dataDir = path.join(work, 'node');
const env = {
  ...process.env, HOST: '127.0.0.1', SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_CONFIG: config,
  SOURCEBOUND_DATABASE_URL: url.toString(), SOURCEBOUND_SHARED_DIR: path.join(work, 'shared'), SOURCEBOUND_DATA_DIR: dataDir,
};

/** A port free right now (the node is given it, so /health can be asked before the node logs anything). */
const freePort = () =>
  new Promise((resolve) => {
    const srv = createServer().listen(0, '127.0.0.1', () => {
      const { port } = srv.address();
      srv.close(() => resolve(port));
    });
  });

/** Starts the node; resolves with its base URL, the ms from spawn to its ready line, and the slowest /health reply meanwhile. */
async function startNode() {
  const port = await freePort();
  const t0 = performance.now();
  const child = spawn(process.execPath, [CLI, 'serve'], { cwd: ROOT, env: { ...env, PORT: String(port) }, stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  let ready = false;
  let worstHealthMs = 0;
  let up = false;
  const probe = (async () => {
    while (!ready && child.exitCode === null) {
      const t = performance.now();
      // Refused before the stand-in listens; once the port has answered, a failed ask counts for as long as it took.
      const answered = await fetch(`http://127.0.0.1:${port}/health`, { signal: AbortSignal.timeout(900_000) }).then(() => true, () => false);
      up ||= answered;
      if (up) worstHealthMs = Math.max(worstHealthMs, performance.now() - t);
      await new Promise((r) => setTimeout(r, 100));
    }
  })();
  const started = await new Promise((resolve, reject) => {
    const on = (d) => {
      out += String(d);
      const m = /ready on (http:\/\/[^\s"]+)/.exec(out);
      if (m) resolve({ base: m[1], ms: performance.now() - t0 });
    };
    child.stdout.on('data', on);
    child.stderr.on('data', on);
    child.once('exit', (code) => reject(new Error(`serve exited with ${code}:\n${out}`)));
  });
  ready = true;
  await probe;
  return { child, ...started, worstHealthMs };
}
const stopNode = (child) => new Promise((resolve) => { child.once('exit', resolve); child.kill('SIGTERM'); });
const search = async (base, body) => {
  const r = await fetch(`${base}/v1/search`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ collection: 'default', ...body }) });
  if (r.status !== 200) throw new Error(`search answered ${r.status}`);
  return r.json();
};

let node = await startNode();
const fromDatabaseMs = node.ms;
const healthFromDatabaseMs = node.worstHealthMs;
await stopNode(node.child);
node = await startNode();
const fromSnapshotMs = node.ms;
const healthFromSnapshotMs = node.worstHealthMs;

const searchable = [];
for (let i = 0; i < Number(args.changes); i++) {
  const mark = `zqmark${i}x`;
  const d = await makeDocument(1_000_000 + i, `${mark} `);
  await sor.replaceDocument(d.doc, d.chunks, d.vectors, embedder.id);
  const t0 = performance.now();
  for (;;) {
    const r = await search(node.base, { query: mark, mode: 'lexical', k: 1 });
    if (r.results.length > 0 && r.results[0].documentId === d.doc.id) break;
    if (performance.now() - t0 > 30_000) throw new Error(`change ${i} not searchable after 30 s`);
  }
  searchable.push(performance.now() - t0);
}

async function throughput(mode) {
  const until = performance.now() + Number(args.seconds) * 1000;
  let done = 0;
  const qrand = rng(9);
  const client = async () => {
    while (performance.now() < until) {
      await search(node.base, { query: `${words[Math.floor(qrand() * 2000)]} ${words[Math.floor(qrand() * 2000)]}`, mode, k: 8 });
      done++;
    }
  };
  const t0 = performance.now();
  await Promise.all(Array.from({ length: Number(args.concurrency) }, client));
  return done / ((performance.now() - t0) / 1000);
}
const health = await (await fetch(`${node.base}/health`)).json();
if (!args.json) console.error('node health before the throughput run:', JSON.stringify(health.lexicalIndex), JSON.stringify(health.follower));
const qpsLexical = await throughput('lexical');
const qpsHybrid = await throughput('hybrid');
const metrics = await (await fetch(`${node.base}/metrics`)).text();
const rss = Number(/^sourcebound_process_resident_memory_bytes (\d+(?:\.\d+)?)/m.exec(metrics)?.[1] ?? NaN);
await stopNode(node.child);
await sor.close();
await admin(`DROP DATABASE IF EXISTS ${dbName} WITH (FORCE)`);
rmSync(work, { recursive: true, force: true });

const result = {
  chunks: CHUNKS,
  dims: DIMS,
  fillSeconds: Math.round(fillSeconds * 10) / 10,
  startFromDatabaseMs: Math.round(fromDatabaseMs),
  startFromSnapshotMs: Math.round(fromSnapshotMs),
  slowestHealthDuringStartMs: { fromDatabase: Math.round(healthFromDatabaseMs), fromSnapshot: Math.round(healthFromSnapshotMs) },
  changeToSearchableMs: { median: Math.round(median(searchable)), p95: Math.round(percentile([...searchable].sort((a, b) => a - b), 95)), n: searchable.length },
  qps: { lexical: Math.round(qpsLexical), hybrid: Math.round(qpsHybrid), concurrency: Number(args.concurrency), seconds: Number(args.seconds) },
  nodeRssMb: Math.round(rss / 1e6),
};
if (args.json) console.log(JSON.stringify(result));
else console.table(Object.entries(result).map(([k, v]) => ({ measure: k, value: typeof v === 'object' ? JSON.stringify(v) : v })));
