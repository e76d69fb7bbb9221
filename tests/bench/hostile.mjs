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
import { deflateRawSync } from 'node:zlib';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const MiB = 1024 * 1024;
const W = 'http://schemas.openxmlformats.org/wordprocessingml/2006/main';

/** A ZIP of deflated entries; `declare` overrides an entry's stated inflated size (a lying header). */
function zip(entries) {
  const parts = [];
  const centrals = [];
  let offset = 0;
  for (const e of entries) {
    const name = Buffer.from(e.name);
    const packed = deflateRawSync(e.data, { level: 9 });
    const size = e.declare ?? e.data.length;
    const local = Buffer.alloc(30);
    local.writeUInt32LE(0x04034b50, 0);
    local.writeUInt16LE(20, 4);
    local.writeUInt16LE(8, 8);
    local.writeUInt32LE(packed.length, 18);
    local.writeUInt32LE(size, 22);
    local.writeUInt16LE(name.length, 26);
    parts.push(local, name, packed);
    const central = Buffer.alloc(46);
    central.writeUInt32LE(0x02014b50, 0);
    central.writeUInt16LE(20, 4);
    central.writeUInt16LE(20, 6);
    central.writeUInt16LE(8, 10);
    central.writeUInt32LE(packed.length, 20);
    central.writeUInt32LE(size, 24);
    central.writeUInt16LE(name.length, 28);
    central.writeUInt32LE(offset, 42);
    centrals.push(central, name);
    offset += 30 + name.length + packed.length;
  }
  const centralSize = centrals.reduce((n, b) => n + b.length, 0);
  const end = Buffer.alloc(22);
  end.writeUInt32LE(0x06054b50, 0);
  end.writeUInt16LE(entries.length, 8);
  end.writeUInt16LE(entries.length, 10);
  end.writeUInt32LE(centralSize, 12);
  end.writeUInt32LE(offset, 16);
  return Buffer.concat([...parts, ...centrals, end]);
}

function wordFile(body, declare) {
  const document = Buffer.from(`<?xml version="1.0"?><w:document xmlns:w="${W}"><w:body>${body}</w:body></w:document>`);
  return zip([
    { name: '[Content_Types].xml', data: Buffer.from('<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types"/>') },
    { name: 'word/document.xml', data: document, declare },
  ]);
}

const INPUTS = {
  'ZIP bomb as .txt, 100 MiB, honest headers': ['meeting.txt', () => wordFile(`<w:p><w:r><w:t>${'A'.repeat(100 * MiB)}</w:t></w:r></w:p>`)],
  'ZIP bomb as .txt, 400 MiB, headers declare 1 KB': ['minutes.txt', () => wordFile(`<w:p><w:r><w:t>${'A'.repeat(400 * MiB)}</w:t></w:r></w:p>`, 1000)],
  'Word file, 60 MiB of paragraphs': ['stops.docx', () => wordFile(`<w:p><w:r><w:t>${'Tram stop '.repeat(100)}</w:t></w:r></w:p>`.repeat(Math.ceil((60 * MiB) / 1037)))],
  '50 MB single line': ['one-line.txt', () => 'fare '.repeat(10_000_000)],
  '4.9 MB single line of distinct words (under the limit)': ['long-line.txt', () => Array.from({ length: 620_000 }, (_, i) => `s${i}`).join(' ')],
  'HTML nested 200,000 deep': ['deep.html', () => `<!doctype html><html><body>${'<div>'.repeat(200_000)}x${'</div>'.repeat(200_000)}</body></html>`],
};

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
