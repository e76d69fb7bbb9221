// The same retrieval evaluation on CISI from the two back ends, run files compared byte for byte.
//
//   npm run build && node tests/bench/backends-cisi.mjs [--modes lexical,hybrid,dense] [--k 1000] [--limit N] [--keep DIR] [--json]
//
// --limit N takes only the first N abstracts of the corpus (every query is still asked; tests/e2e runs it so).
//
// CISI (../shared/eval/cisi: 1,460 abstracts, 76 judged queries) is written as one text file per abstract
// (`<id>.txt`: the title, a blank line, the abstract), then, on the compiled code in dist/, as a user runs it:
//   - embedded: `sourcebound ingest <folder> --collection cisi` into a data folder of its own;
//   - PostgreSQL: the files are put in the shared folder's upload folder of collection `cisi`, `sourcebound
//     reindex --collection cisi` queues the collection's re-index, a `sourcebound worker` runs it into the
//     database, and an API node (`sourcebound serve`, started on an empty data folder before the worker) follows
//     the change log until it holds the database's head; the node is then stopped;
//   - `sourcebound eval retrieval --collection cisi` ranks each data folder's store (the embedded one, the
//     node's copy) for every mode, writing a TREC run file each, and the two run files are compared byte for byte.
// The hashing embedder is used (no model to download). A database of its own is created and dropped
// (SOURCEBOUND_TEST_PG_URL, default the local server with trust auth). Exit code 1 when any pair differs.
import { execFileSync, spawn } from 'node:child_process';
import { copyFileSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import pg from 'pg';
import { openPgSystemOfRecord } from '../../dist/store/pg/index.js';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const CLI = path.join(ROOT, 'dist', 'cli.js');
const EVAL = path.resolve(ROOT, '..', 'shared', 'eval', 'cisi');
const ADMIN = process.env.SOURCEBOUND_TEST_PG_URL ?? 'postgres://postgres@127.0.0.1:5432/postgres';
const { values: args } = parseArgs({
  options: {
    modes: { type: 'string', default: 'lexical,hybrid,dense' },
    k: { type: 'string', default: '1000' },
    limit: { type: 'string' },
    keep: { type: 'string' },
    json: { type: 'boolean', default: false },
  },
});
const say = (m) => {
  if (!args.json) process.stderr.write(`${m}\n`);
};
const admin = async (sql) => {
  const c = new pg.Client({ connectionString: ADMIN });
  await c.connect();
  try {
    await c.query(sql);
  } finally {
    await c.end();
  }
};

const work = mkdtempSync(path.join(tmpdir(), 'sb-backends-cisi-'));
const docs = path.join(work, 'docs');
mkdirSync(docs);
let n = 0;
for (const line of readFileSync(path.join(EVAL, 'corpus.jsonl'), 'utf8').split('\n')) {
  if (!line.trim()) continue;
  if (args.limit && n >= Number(args.limit)) break;
  const d = JSON.parse(line);
  writeFileSync(path.join(docs, `${d.id}.txt`), `${(d.title ?? '').trim()}\n\n${d.text}\n`);
  n++;
}

const dbName = `sb_cisi_${process.pid}`;
await admin(`CREATE DATABASE ${dbName}`);
const url = new URL(ADMIN);
url.pathname = `/${dbName}`;
const shared = path.join(work, 'shared');
const config = path.join(work, 'postgres.json');
writeFileSync(config, JSON.stringify({ storage: { backend: 'postgres', followPollMs: 500 } }));
const base = { ...process.env, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'info' };
delete base.SOURCEBOUND_CONFIG;
const embeddedEnv = { ...base, SOURCEBOUND_DATA_DIR: path.join(work, 'embedded') };
const pgEnv = (dataDir) => ({ ...base, SOURCEBOUND_CONFIG: config, SOURCEBOUND_DATABASE_URL: url.toString(), SOURCEBOUND_SHARED_DIR: shared, SOURCEBOUND_DATA_DIR: dataDir, PORT: '0', HOST: '127.0.0.1' });
const cli = (argv, env) => execFileSync(process.execPath, [CLI, ...argv], { cwd: ROOT, env, encoding: 'utf8', stdio: ['ignore', 'pipe', 'pipe'] });

/** Spawns a long-running command; resolves once its output matches `ready`. */
function start(argv, env, ready) {
  const child = spawn(process.execPath, [CLI, ...argv], { cwd: ROOT, env, stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  return new Promise((resolve, reject) => {
    const on = (d) => {
      out += String(d);
      const m = ready.exec(out);
      if (m) resolve({ child, match: m });
    };
    child.stdout.on('data', on);
    child.stderr.on('data', on);
    child.once('exit', (code) => reject(new Error(`${argv[0]} exited with ${code}:\n${out.slice(-4000)}`)));
  });
}
const stop = (child) => new Promise((resolve) => {
  if (child.exitCode !== null) return resolve();
  child.once('exit', resolve);
  child.kill('SIGTERM');
});
const until = async (what, check, ms) => {
  const deadline = performance.now() + ms;
  for (;;) {
    const v = await check();
    if (v) return v;
    if (performance.now() > deadline) throw new Error(`timed out after ${ms} ms waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 200));
  }
};

let node;
let worker;
const sor = await openPgSystemOfRecord(url.toString(), { max: 2 });
try {
  let t0 = performance.now();
  const summary = JSON.parse(cli(['ingest', docs, '--collection', 'cisi', '--json'], embeddedEnv));
  if (summary.documents?.added !== n) throw new Error(`embedded ingest: ${JSON.stringify(summary.documents ?? summary)}`);
  const embeddedSeconds = (performance.now() - t0) / 1000;
  say(`embedded: ${n} documents ingested in ${embeddedSeconds.toFixed(1)} s`);

  const uploads = path.join(shared, 'uploads', 'cisi');
  mkdirSync(uploads, { recursive: true });
  for (const f of readdirSync(docs)) copyFileSync(path.join(docs, f), path.join(uploads, f));
  await sor.ensureCollection('cisi');
  node = await start(['serve'], pgEnv(path.join(work, 'node')), /ready on (http:\/\/[^\s"]+)/);
  const nodeUrl = node.match[1];
  t0 = performance.now();
  const queued = JSON.parse(cli(['reindex', '--collection', 'cisi', '--json'], pgEnv(path.join(work, 'queue'))));
  const jobId = queued.queued[0].job;
  worker = await start(['worker'], pgEnv(path.join(work, 'worker')), /worker ready/);
  const job = await until(`job ${jobId}`, async () => {
    const j = await sor.jobs.get(jobId);
    return j && (j.state === 'succeeded' || j.state === 'failed') ? j : null;
  }, 15 * 60_000);
  if (job.state !== 'succeeded') throw new Error(`the re-index job failed: ${job.error}`);
  const workerSeconds = (performance.now() - t0) / 1000;
  say(`postgres: worker wrote ${JSON.stringify(job.result)} in ${workerSeconds.toFixed(1)} s`);
  const head = await sor.changeHead();
  await until('the node to reach the head', async () => {
    const h = await (await fetch(`${nodeUrl}/health`)).json();
    return h.follower?.position >= head;
  }, 5 * 60_000);
  say(`postgres: the node holds position ${head}`);
  await stop(worker.child);
  await stop(node.child);

  const rows = [];
  for (const mode of args.modes.split(',')) {
    const ran = {};
    for (const [name, env] of [['embedded', embeddedEnv], ['postgres', { ...base, SOURCEBOUND_DATA_DIR: path.join(work, 'node') }]]) {
      const run = path.join(work, `cisi-${mode}-${name}.run`);
      const r = JSON.parse(cli(['eval', 'retrieval', '--collection', 'cisi', '--queries', path.join(EVAL, 'queries.jsonl'), '--qrels', path.join(EVAL, 'qrels.txt'), '--mode', mode, '--k', args.k, '--run', run, '--json'], env));
      ran[name] = { ndcg: r['ndcg@10'], map: r.map, documents: r.documents, bytes: readFileSync(run) };
    }
    const same = Buffer.compare(ran.embedded.bytes, ran.postgres.bytes) === 0;
    const lines = ran.embedded.bytes.toString('utf8').split('\n').filter(Boolean).length;
    rows.push({ mode, documents: `${ran.embedded.documents} / ${ran.postgres.documents}`, 'nDCG@10': `${ran.embedded.ndcg.toFixed(4)} / ${ran.postgres.ndcg.toFixed(4)}`, MAP: `${ran.embedded.map.toFixed(4)} / ${ran.postgres.map.toFixed(4)}`, lines, identical: same });
    say(`${mode}: ${same ? 'identical run files' : 'RUN FILES DIFFER'} (${lines} lines)`);
  }
  const result = { documents: n, embeddedIngestSeconds: Math.round(embeddedSeconds * 10) / 10, workerSeconds: Math.round(workerSeconds * 10) / 10, modes: rows };
  if (args.json) console.log(JSON.stringify(result));
  else {
    console.log(`| mode | documents (embedded / postgres) | nDCG@10 (embedded / postgres) | MAP | run lines | byte for byte |`);
    console.log(`|---|---|---|---|---:|---|`);
    for (const r of rows) console.log(`| ${r.mode} | ${r.documents} | ${r['nDCG@10']} | ${r.MAP} | ${r.lines} | ${r.identical ? 'identical' : 'differ'} |`);
  }
  if (args.keep) {
    mkdirSync(args.keep, { recursive: true });
    for (const f of readdirSync(work).filter((f) => f.endsWith('.run'))) copyFileSync(path.join(work, f), path.join(args.keep, f));
  }
  process.exitCode = rows.every((r) => r.identical) ? 0 : 1;
} finally {
  if (worker) await stop(worker.child);
  if (node) await stop(node.child);
  await sor.close();
  await admin(`DROP DATABASE IF EXISTS ${dbName} WITH (FORCE)`);
  rmSync(work, { recursive: true, force: true });
}
