// Ingest throughput on the Cranfield collection as a folder of text files (1,400 abstracts, one file each), through
// the CLI as a user runs it, with the built-in hashing embedder:
//   npm run build && node tests/bench/ingest-cranfield.mjs [--runs 3] [--corpus ../shared/eval/cranfield/corpus.jsonl] [--profile DIR]
//     [--baseline DIST]
// --baseline: the dist/ folder of an earlier build (with node_modules reachable from it), run alternately with this
// build's in the same run.
// Each run ingests into a fresh data folder in a child process; the figure is documents per second of wall time
// for the whole command (start-up included), median of the runs. --profile writes a V8 CPU profile of each run.
// Beside it, in the same run and alternating with it, the Xapian library's indexer (tests/bench/xapian-index.py,
// Debian's python3-xapian) on the same files, when a Python with the xapian module is found (SB_BENCH_PYTHON,
// /usr/bin/python3 or python3 on the PATH); without one that column is skipped with a message. Nothing is installed.
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
    baseline: { type: 'string' },
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
const python = findXapianPython();
if (!python) process.stderr.write('Xapian column skipped: no Python with the xapian module (Debian: apt-get install python3-xapian)\n');
const xapianSeconds = [];
const seconds = [];
const baselineSeconds = [];
/** One ingest through a build's CLI into a fresh data folder: wall seconds. */
const ingest = (dist, dataDir, label) => {
  const t0 = performance.now();
  const out = execFileSync(process.execPath, [...(args.profile ? ['--cpu-prof', `--cpu-prof-dir=${args.profile}`] : []), path.join(dist, 'cli.js'), 'ingest', docs, '--collection', 'cranfield', '--json'], {
    env: { ...process.env, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent', SOURCEBOUND_DATA_DIR: dataDir },
    encoding: 'utf8',
  });
  const s = (performance.now() - t0) / 1000;
  const summary = JSON.parse(out);
  if (summary.documents?.added !== n) throw new Error(`${label}: ${JSON.stringify(summary.documents ?? summary)}`);
  process.stderr.write(`${label}: ${s.toFixed(2)} s\n`);
  return s;
};
for (let r = 0; r < Number(args.runs); r++) {
  if (args.baseline) baselineSeconds.push(ingest(path.resolve(args.baseline), path.join(work, `base-${r}`), `run ${r + 1}: earlier build`));
  if (python) {
    const t0 = performance.now();
    const out = JSON.parse(execFileSync(python, [path.join(import.meta.dirname, 'xapian-index.py'), docs, path.join(work, `xapian-${r}`)], { encoding: 'utf8' }));
    xapianSeconds.push((performance.now() - t0) / 1000);
    if (out.documents !== n) throw new Error(`Xapian indexed ${out.documents} of ${n} files`);
    process.stderr.write(`run ${r + 1}: Xapian ${xapianSeconds[r].toFixed(2)} s (${out.seconds.toFixed(2)} s inside the script)\n`);
  }
  seconds.push(ingest(path.join(ROOT, 'dist'), path.join(work, `data-${r}`), `run ${r + 1}: this build`));
}
const mid = (xs) => [...xs].sort((a, b) => a - b)[Math.floor(xs.length / 2)];
const median = mid(seconds);
if (args.baseline) console.log(`| Cranfield as ${n} text files, earlier build | hashing | ${mid(baselineSeconds).toFixed(2)} s | ${(n / mid(baselineSeconds)).toFixed(1)} documents/s |`);
console.log(`| Cranfield as ${n} text files | hashing | ${median.toFixed(2)} s | ${(n / median).toFixed(1)} documents/s |`);
console.log(python ? `| Cranfield as ${n} text files, Xapian's indexer (lexical only) | - | ${mid(xapianSeconds).toFixed(2)} s | ${(n / mid(xapianSeconds)).toFixed(1)} documents/s |` : `| Xapian's indexer | skipped: no Python with the xapian module | | |`);
rmSync(work, { recursive: true, force: true });

/** A Python that can import xapian, or null. */
function findXapianPython() {
  for (const candidate of [process.env.SB_BENCH_PYTHON, '/usr/bin/python3', 'python3']) {
    if (!candidate) continue;
    try {
      execFileSync(candidate, ['-c', 'import xapian'], { stdio: 'ignore' });
      return candidate;
    } catch {
      /* not this one */
    }
  }
  return null;
}
