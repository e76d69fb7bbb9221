// The in-memory lexical index while documents change, on the compiled code in dist/ (run `npm run build` first):
// at N chunks (default 100k, synthetic: generate.mjs), how long one updated document takes to become searchable,
// query latency (lexical search through the retriever, the service's settings: RM3 on) while documents change
// against idle, and resident memory during the changes against steady.
//
//   npm run build && node --expose-gc tests/bench/lexical-change.mjs [--chunks 100000] [--changes 500] [--keep DIR]
//     [--apply thread|query] [--max-segment-rows N] [--json]
//
// Writes go through a second connection, as the job thread's do; the index is the service's (background loading
// and merging, a long run of changes applied in slices, segments of at most 16,384 rows). Each change replaces one
// document (10 chunks: 10 rows deleted, 10 added). As in the service, the index is told as soon as a change is
// written (the document API does so when a job ends). --apply thread (the service's): the changed rows are read
// and tokenized on the change thread and applied between queries, which meanwhile answer from the index as it
// was; --apply query: without the change thread, the next query applies the change itself before answering.
// The first query after a change is timed from the commit, so it holds whatever part of the change's cost falls
// on the query path; it counts among the "during changes" queries. "Searchable" is the time from the commit until
// the index holds the change (whenReady).
// A query's latency runs from the moment it is due to its answer, so a background merge slice it waits behind
// is counted too.
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { openDatabase, openStore, SqliteStore, createVectorIndexes } from '../../dist/store/index.js';
import { createLexicalChangeThread, createLexicalMemory, createRetriever, retrieverOptions, STOP_WORDS } from '../../dist/retrieve/index.js';
import { configSchema } from '../../dist/config/schema.js';
import { latencySummary, rng, vocabulary, zipfSampler } from './generate.mjs';

const { values: args } = parseArgs({
  options: {
    chunks: { type: 'string', default: '100000' },
    changes: { type: 'string', default: '500' },
    'queries-per-change': { type: 'string', default: '2' },
    apply: { type: 'string', default: 'thread' },
    'max-segment-rows': { type: 'string', default: '16384' },
    keep: { type: 'string' },
    json: { type: 'boolean', default: false },
  },
});
const CHUNKS = Number(args.chunks);
const CHANGES = Number(args.changes);
const PER_CHANGE = Number(args['queries-per-change']);
const CHUNKS_PER_DOC = 10;
const WORDS_PER_CHUNK = 120;
const log = (m) => process.stderr.write(`${m}\n`);
const median = (xs) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
const mib = (b) => b / 2 ** 20;

const vocab = [...STOP_WORDS, ...vocabulary(30_000)];
const rand = rng(3);
const word = zipfSampler(vocab.length, rand);
const chunkText = () => Array.from({ length: WORDS_PER_CHUNK }, () => vocab[word()]).join(' ');

function writeDoc(repo, d, version) {
  const texts = Array.from({ length: CHUNKS_PER_DOC }, chunkText);
  let offset = 0;
  const inputs = texts.map((text, c) => {
    const start = offset;
    offset += text.length + 2;
    return { ordinal: c, text, start, end: start + text.length, headingPath: [`Part ${c + 1}`], pageStart: null, pageEnd: null, tokenCount: WORDS_PER_CHUNK, chunkHash: `h${d}-${c}-${version}` };
  });
  repo.replaceDocument(
    { id: `doc${d}`, collection: 'bench', source: `doc${d}.txt`, root: null, title: `Notice ${d}`, format: 'text', contentHash: `c${d}-${version}`, byteSize: offset, pageCount: null, effectiveDate: null, metadata: {}, text: texts.join('\n\n'), settingsKey: 'bench' },
    inputs,
    new Map(),
    'bench-384',
  );
}

const dir = args.keep ?? mkdtempSync(path.join(tmpdir(), 'sb-bench-lexchange-'));
const file = path.join(dir, 'bench.db');
const docs = Math.ceil(CHUNKS / CHUNKS_PER_DOC);
if (!existsSync(path.join(dir, `ready-${CHUNKS}`))) {
  const db = openDatabase(file);
  db.pragma('synchronous = OFF');
  const repo = new SqliteStore(db);
  repo.ensureCollection('bench');
  const t0 = performance.now();
  repo.transaction(() => {
    for (let d = 0; d < docs; d++) writeDoc(repo, d, 0);
  });
  repo.close();
  writeFileSync(path.join(dir, `ready-${CHUNKS}`), '');
  log(`stored ${CHUNKS} chunks in ${((performance.now() - t0) / 1000).toFixed(1)} s`);
}
// Queries: 3–6 words of middling frequency, as content words of a real question would be.
const qrand = rng(5);
const queries = Array.from({ length: 400 }, () => Array.from({ length: 3 + Math.floor(qrand() * 4) }, () => vocab[STOP_WORDS.size + 50 + Math.floor(qrand() * 5000)]).join(' '));

const reader = openStore(file);
const writer = openStore(file);
if (!['thread', 'query'].includes(args.apply)) throw new Error('--apply is thread or query');
const MAX_SEGMENT_ROWS = Number(args['max-segment-rows']);
const mem = createLexicalMemory(reader, { background: true, maxSegmentRows: MAX_SEGMENT_ROWS, ...(args.apply === 'thread' ? { changeReader: createLexicalChangeThread(file) } : {}) });
const indexes = createVectorIndexes({ repo: reader, dir: path.join(dir, 'index'), embedderId: 'bench-384', dimensions: 384 });
const embedder = { id: 'bench-384', dimensions: 384, semantic: true, maxTokens: 256, countTokens: (t) => t.split(' ').length, embed: async () => [] };
// Counts the searches the index declined (FTS5 answered them instead).
let fallbacks = 0;
const counted = {
  ...mem,
  search: (...a) => {
    const r = mem.search(...a);
    if (r === null) fallbacks++;
    return r;
  },
};
const retriever = createRetriever({ repo: reader, indexes, embedder, options: { ...retrieverOptions(configSchema.parse({}).retrieval), lexicalEngine: 'memory' }, lexicalIndex: counted });

let t0 = performance.now();
await mem.whenReady();
const loadSeconds = (performance.now() - t0) / 1000;
log(`index loaded in ${loadSeconds.toFixed(1)} s: ${JSON.stringify(mem.stats())}`);

const turn = () => new Promise((r) => setImmediate(r));
let rssPeak = 0;
let heapPeak = 0;
async function query(q, dueAt) {
  const due = dueAt ?? performance.now();
  await turn();
  await retriever.search({ query: q, collection: 'bench', k: 10, mode: 'lexical' });
  const ms = performance.now() - due;
  const mu = process.memoryUsage();
  rssPeak = Math.max(rssPeak, mu.rss);
  heapPeak = Math.max(heapPeak, mu.heapUsed + mu.external);
  return ms;
}

for (const q of queries.slice(0, 50)) await query(q); // warm-up
globalThis.gc?.();
rssPeak = 0;
heapPeak = 0;
const idle = [];
for (let i = 0; i < CHANGES * PER_CHANGE; i++) idle.push(await query(queries[i % queries.length]));
const rssSteady = rssPeak;
const heapSteady = heapPeak;

rssPeak = 0;
heapPeak = 0;
fallbacks = 0;
const during = [];
const visible = [];
const writeMs = [];
const applyMs = [];
const mergesBefore = mem.stats().merges;
const drand = rng(9);
for (let c = 0; c < CHANGES; c++) {
  const d = Math.floor(drand() * docs);
  t0 = performance.now();
  writeDoc(writer, d, c + 1);
  const committed = performance.now();
  writeMs.push(committed - t0);
  // What the document API does when a job ends: tell the index (the change thread reads the rows, or, without
  // it, they are applied here at once).
  mem.refresh();
  applyMs.push(performance.now() - committed);
  const searchable = mem.whenReady().then(() => visible.push(performance.now() - committed));
  for (let k = 0; k < PER_CHANGE; k++) {
    const ms = await query(queries[(c * PER_CHANGE + k) % queries.length], k === 0 ? committed : undefined);
    during.push(ms);
  }
  await searchable;
}
const rssChange = rssPeak;
const heapChange = heapPeak;
const s = mem.stats();
const idleSummary = latencySummary(idle);
const duringSummary = latencySummary(during);
const result = {
  chunks: CHUNKS,
  apply: args.apply,
  maxSegmentRows: MAX_SEGMENT_ROWS,
  largestSegmentRows: s.largestSegmentRows,
  changes: CHANGES,
  loadSeconds,
  writeMsMedian: median(writeMs),
  applyMsMedian: median(applyMs),
  applyMsP95: latencySummary(applyMs).p95,
  searchableMsMedian: median(visible),
  searchableMsP95: latencySummary(visible).p95,
  idle: idleSummary,
  during: duringSummary,
  p95Ratio: duringSummary.p95 / idleSummary.p95,
  rssSteadyMiB: mib(rssSteady),
  rssChangeMiB: mib(rssChange),
  rssRatio: rssChange / rssSteady,
  heapSteadyMiB: mib(heapSteady),
  heapChangeMiB: mib(heapChange),
  merges: s.merges - mergesBefore,
  segments: s.segments,
  builds: s.builds,
  fallbacks,
};
if (args.json) console.log(JSON.stringify(result));
else {
  const f = (x, d = 2) => x.toFixed(d);
  console.log(`| chunks | apply | refresh() on the request thread (median / p95 ms) | searchable after the commit (median / p95 ms) | write ms (median) | query p50 / p95 ms idle | query p50 / p95 ms during changes | p95 ratio | RSS steady / during changes (MiB) | RSS ratio | JS heap + external steady / during (MiB) | merges | whole loads | declined (FTS5 answered) |`);
  console.log('|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|');
  console.log(`| ${CHUNKS.toLocaleString('en')} | ${args.apply} | ${f(result.applyMsMedian)} / ${f(result.applyMsP95)} | ${f(result.searchableMsMedian)} / ${f(result.searchableMsP95)} | ${f(result.writeMsMedian)} | ${f(idleSummary.p50)} / ${f(idleSummary.p95)} | ${f(duringSummary.p50)} / ${f(duringSummary.p95)} | ${f(result.p95Ratio)} | ${f(result.rssSteadyMiB, 0)} / ${f(result.rssChangeMiB, 0)} | ${f(result.rssRatio)} | ${f(result.heapSteadyMiB, 0)} / ${f(result.heapChangeMiB, 0)} | ${result.merges} | ${result.builds} | ${fallbacks} |`);
}
mem.close();
indexes.close();
writer.close();
reader.close();
if (!args.keep) rmSync(dir, { recursive: true, force: true });
