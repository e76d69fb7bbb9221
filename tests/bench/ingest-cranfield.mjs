// Ingest throughput on the Cranfield collection as a folder of text files (1,400 abstracts, one file each), through
// the CLI as a user runs it, with the built-in hashing embedder:
//   npm run build && node tests/bench/ingest-cranfield.mjs [--runs 3] [--corpus ../shared/eval/cranfield/corpus.jsonl] [--profile DIR]
// Each run ingests into a fresh data folder in a child process; the figure is documents per second of wall time
// for the whole command (start-up included), median of the runs. --profile writes a V8 CPU profile of each run.
import { execFileSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const { values: args } = parseArgs({
  options: {
    runs: { type: 'string', default: '3' },
    corpus: { type: 'string', default: path.resolve(ROOT, '..', 'shared', 'eval', 'cranfield', 'corpus.jsonl') },
    profile: { type: 'string' },
  },
});
const work = mkdtempSync(path.join(tmpdir(), 'sb-bench-cran-'));
const docs = path.join(work, 'docs');
mkdirSync(docs);
let n = 0;
for (const line of readFileSync(args.corpus, 'utf8').split('\n')) {
  if (!line.trim()) continue;
  const d = JSON.parse(line);
  if (!`${d.title ?? ''}${d.text ?? ''}`.trim()) continue;
  writeFileSync(path.join(docs, `${d.id}.txt`), `${(d.title ?? '').trim()}\n\n${d.text}\n`);
  n++;
}
const seconds = [];
for (let r = 0; r < Number(args.runs); r++) {
  const dataDir = path.join(work, `data-${r}`);
  const t0 = performance.now();
  const out = execFileSync(process.execPath, [...(args.profile ? ['--cpu-prof', `--cpu-prof-dir=${args.profile}`] : []), path.join(ROOT, 'dist', 'cli.js'), 'ingest', docs, '--collection', 'cranfield', '--json'], {
    env: { ...process.env, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent', SOURCEBOUND_DATA_DIR: dataDir },
    encoding: 'utf8',
  });
  seconds.push((performance.now() - t0) / 1000);
  const summary = JSON.parse(out);
  process.stderr.write(`run ${r + 1}: ${seconds[r].toFixed(2)} s, ${JSON.stringify(summary.documents ?? summary)}\n`);
}
seconds.sort((a, b) => a - b);
const median = seconds[Math.floor(seconds.length / 2)];
console.log(`| Cranfield as ${n} text files | hashing | ${median.toFixed(2)} s | ${(n / median).toFixed(1)} documents/s |`);
rmSync(work, { recursive: true, force: true });
