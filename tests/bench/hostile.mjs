// node tests/bench/hostile.mjs (after npm run build; also `npm run bench -- hostile`): each hostile input is
// ingested by a fresh process with the default limits and the hashing embedder, which reports the seconds
// the ingest took, how it ended, and its peak resident memory (VmHWM from /proc/self/status, Linux only).
// The inputs are generated here: ZIP bombs posing as .txt (honest and lying headers; PKWARE APPNOTE.TXT 4.3,
// DEFLATE by Node's zlib), a Word file of 60 MiB of text, a 50 MB line, a 4.95 MB line (just under the
// character limit), and HTML nested 200,000 deep. Each input is written by this process and read by the child,
// so the child's peak is the ingest's alone. Prints a Markdown table.
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const { INPUTS } = await import('./hostile-inputs.mjs');
const MiB = 1024 * 1024;

if (process.argv[2] === '--one') {
  // The child: ingest the one file in the folder it is given, report as JSON on stdout.
  const docs = process.argv[3];
  const { loadConfig } = await import(path.join(root, 'dist', 'config', 'index.js'));
  const { createRuntime } = await import(path.join(root, 'dist', 'runtime.js'));
  const { silentLogger } = await import(path.join(root, 'dist', 'logger.js'));
  const dataDir = mkdtempSync(path.join(tmpdir(), 'sb-hostile-data-'));
  try {
    const config = loadConfig({ env: {}, overrides: { dataDir, embedding: { provider: 'hashing', modelDir: dataDir } } });
    const rt = await createRuntime(config, silentLogger());
    const started = performance.now();
    const s = await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const seconds = (performance.now() - started) / 1000;
    const chunks = rt.repo.chunksOfCollection('c').length;
    rt.close();
    const hwm = Number(/VmHWM:\s+(\d+)/.exec(readFileSync('/proc/self/status', 'utf8'))?.[1] ?? NaN);
    process.stdout.write(JSON.stringify({ seconds, outcome: s.failures[0]?.reason ?? `added, ${chunks} chunks`, peakMiB: hwm / 1024 }));
  } finally {
    rmSync(dataDir, { recursive: true, force: true });
  }
} else {
  const rows = ['| input | file size | ingest s | outcome | peak RSS MiB (whole process) |', '|---|---:|---:|---|---:|'];
  for (const [label, [name, make]] of Object.entries(INPUTS)) {
    process.stderr.write(`hostile: ${label}\n`);
    const docs = mkdtempSync(path.join(tmpdir(), 'sb-hostile-docs-'));
    try {
      const bytes = make();
      writeFileSync(path.join(docs, name), bytes);
      const r = JSON.parse(execFileSync(process.execPath, [fileURLToPath(import.meta.url), '--one', docs], { encoding: 'utf8', stdio: ['ignore', 'pipe', 'inherit'] }));
      rows.push(`| ${label} | ${(bytes.length / MiB).toFixed(2)} MiB | ${r.seconds.toFixed(1)} | ${r.outcome} | ${r.peakMiB.toFixed(0)} |`);
    } finally {
      rmSync(docs, { recursive: true, force: true });
    }
  }
  process.stdout.write(`${rows.join('\n')}\n`);
}
