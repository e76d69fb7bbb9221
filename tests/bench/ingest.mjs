#!/usr/bin/env node
// Ingestion throughput, measured on the compiled code in dist/ (run `npm run build` first):
//   PDF text extraction in pages per second, the chunker (normalise + chunk) in chunks per second,
//   the same with embedding, and the whole ingest (load, chunk, embed, SQLite, HNSW) end to end,
//   for each embedder, on the demo corpus (seed-docs/) and on the CISI collection.
// Usage: node tests/bench/ingest.mjs [--runs N] [--cisi path/to/corpus.jsonl] [--json]
// Each figure is the median of N runs (default 5; 3 for the end-to-end ingests).
import { mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { pathToFileURL } from 'node:url';
import ts from 'typescript';
import { PDFDocument, StandardFonts } from 'pdf-lib';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const dist = (p) => import(pathToFileURL(path.join(ROOT, 'dist', p)).href);
const { loadDocument, buildNormalisedDocument, chunkDocument } = await dist('ingest/index.js');
const { createHashingEmbedder, createTransformersEmbedder } = await dist('embed/index.js');
const { loadConfig } = await dist('config/index.js');
const { createRuntime } = await dist('runtime.js');
const { silentLogger } = await dist('logger.js');

const { values: args } = parseArgs({
  options: {
    runs: { type: 'string', default: '5' },
    cisi: { type: 'string', default: path.resolve(ROOT, '..', 'shared', 'eval', 'cisi', 'corpus.jsonl') },
    json: { type: 'boolean', default: false },
  },
});
const RUNS = Math.max(1, Number(args.runs));
const SEED = path.join(ROOT, 'seed-docs');
const CHUNKING = { targetTokens: 180, maxTokens: 256, overlapTokens: 32 }; // config/default values

const median = (xs) => {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
};
async function timed(runs, fn) {
  const seconds = [];
  let out;
  for (let i = 0; i < runs; i++) {
    const t0 = performance.now();
    out = await fn();
    seconds.push((performance.now() - t0) / 1000);
  }
  return { seconds: median(seconds), out };
}

// The tiny test model is written by a TypeScript fixture; transpile it once into a temporary module,
// pointing its one package import at the project's own node_modules.
async function tinyEmbedder(dir) {
  const src = readFileSync(path.join(ROOT, 'tests', 'fixtures', 'tiny-model.ts'), 'utf8');
  const onnxUrl = import.meta.resolve('onnx-proto');
  const js = ts
    .transpileModule(src, { compilerOptions: { module: ts.ModuleKind.ESNext, target: ts.ScriptTarget.ES2022 } })
    .outputText.replace(/from ['"]onnx-proto['"]/, `from '${onnxUrl}'`);
  const file = path.join(dir, 'tiny-model.mjs');
  writeFileSync(file, js);
  const { writeTinyModel } = await import(pathToFileURL(file).href);
  const model = await writeTinyModel(path.join(dir, 'models'));
  return createTransformersEmbedder({ modelId: model.modelId, modelDir: model.modelDir });
}

function cisiRecords(file) {
  return readFileSync(file, 'utf8')
    .split('\n')
    .filter((l) => l.trim() !== '')
    .map((l) => JSON.parse(l));
}

// CISI as one long PDF (title line, text wrapped at 90 characters, 50 lines a page, a running
// header and a page-number footer), so PDF extraction is also measured on more than a few pages.
async function cisiPdf(records) {
  const doc = await PDFDocument.create();
  const font = await doc.embedFont(StandardFonts.Helvetica);
  const lines = [];
  for (const r of records) {
    lines.push(`${r.id}. ${r.title ?? ''}`.slice(0, 90));
    let line = '';
    for (const w of String(r.text).split(/\s+/)) {
      if (line && line.length + w.length + 1 > 90) {
        lines.push(line);
        line = w;
      } else line = line ? `${line} ${w}` : w;
    }
    if (line) lines.push(line);
    lines.push('');
  }
  const clean = (s) => s.replace(/[^\x20-\x7e]/g, '?');
  for (let p = 0; p * 50 < lines.length; p++) {
    const page = doc.addPage([595, 842]);
    page.drawText('CISI collection - benchmark copy', { x: 50, y: 800, size: 9, font });
    lines.slice(p * 50, p * 50 + 50).forEach((l, i) => page.drawText(clean(l), { x: 50, y: 770 - i * 14, size: 10, font }));
    page.drawText(`Page ${p + 1}`, { x: 280, y: 30, size: 9, font });
  }
  return doc.save();
}

const machine = `${os.cpus()[0]?.model ?? 'unknown CPU'} × ${os.cpus().length}, ${Math.round(os.totalmem() / 2 ** 30)} GiB, Node ${process.version}, ${os.platform()}`;
const rows = [];
const row = (corpus, stage, embedder, unit, count, seconds) =>
  rows.push({ corpus, stage, embedder, unit, count, seconds: +seconds.toFixed(4), perSecond: +(count / seconds).toFixed(1) });

const tmp = mkdtempSync(path.join(os.tmpdir(), 'sb-bench-ingest-'));
try {
  const embedders = [
    ['hashing', createHashingEmbedder()],
    ['transformers, tiny test model', await tinyEmbedder(tmp)],
  ];

  // Inputs, read once: the demo corpus files and CISI records.
  const seedFiles = readdirSync(SEED)
    .filter((f) => /\.(pdf|md|html|txt)$/.test(f))
    .map((f) => ({ name: f, bytes: new Uint8Array(readFileSync(path.join(SEED, f))) }));
  const records = cisiRecords(args.cisi);
  const cisiPdfBytes = await cisiPdf(records);

  // 1. PDF extraction (load: text, running-line removal, hyphen rejoin, blocks).
  const seedPdfs = seedFiles.filter((f) => f.name.endsWith('.pdf'));
  const pdfDemo = await timed(RUNS, async () => {
    let pages = 0;
    for (const f of seedPdfs) pages += (await loadDocument(f.bytes, f.name)).pageCount;
    return pages;
  });
  row('demo', 'PDF load', '-', 'pages', pdfDemo.out, pdfDemo.seconds);
  const pdfCisi = await timed(RUNS, async () => (await loadDocument(cisiPdfBytes, 'cisi.pdf')).pageCount);
  row('CISI as PDF', 'PDF load', '-', 'pages', pdfCisi.out, pdfCisi.seconds);

  // Documents normalised once; the chunker is timed on its own below.
  const demoLoaded = [];
  for (const f of seedFiles) demoLoaded.push(await loadDocument(f.bytes, f.name));
  const corpora = [
    ['demo', demoLoaded.map((d) => ({ title: d.title, doc: buildNormalisedDocument(d.blocks) }))],
    [
      'CISI',
      records.map((r) => ({
        title: r.title ?? '',
        doc: buildNormalisedDocument([
          { kind: 'heading', level: 1, text: r.title ?? '' },
          { kind: 'paragraph', text: r.text },
        ]),
      })),
    ],
  ];

  for (const [name, embedder] of embedders) {
    const maxTokens = Math.min(CHUNKING.maxTokens, embedder.maxTokens - 40);
    const opts = { ...CHUNKING, maxTokens, targetTokens: Math.min(CHUNKING.targetTokens, maxTokens), countTokens: (t) => embedder.countTokens(t) };
    for (const [corpus, docs] of corpora) {
      // 2. The chunker alone, counting in this embedder's tokens.
      const chunked = await timed(RUNS, () => docs.map((d) => ({ title: d.title, chunks: chunkDocument(d.doc, opts) })));
      const n = chunked.out.reduce((k, d) => k + d.chunks.length, 0);
      row(corpus, 'chunk (embedding excluded)', name, 'chunks', n, chunked.seconds);
      // 3. Chunker plus embedding of each chunk with its title, in batches of 32 as the pipeline does.
      const withEmbed = await timed(RUNS, async () => {
        let k = 0;
        for (const d of docs) {
          const texts = chunkDocument(d.doc, opts).map((c) => `${d.title}\n${c.text}`);
          for (let i = 0; i < texts.length; i += 32) k += (await embedder.embed(texts.slice(i, i + 32))).length;
        }
        return k;
      });
      row(corpus, 'chunk + embed', name, 'chunks', withEmbed.out, withEmbed.seconds);
    }

    // 4. The whole pipeline into a fresh store: load (demo) or pre-loaded records (CISI), chunk,
    //    embed, SQLite transaction per document, HNSW sync.
    const e2eRuns = Math.min(RUNS, 3);
    for (const corpus of ['demo', 'CISI']) {
      const seconds = [];
      let chunks = 0;
      for (let i = 0; i < e2eRuns; i++) {
        const dataDir = mkdtempSync(path.join(tmp, 'data-'));
        const config = loadConfig({ env: {}, overrides: { dataDir, embedding: { provider: 'hashing', modelDir: path.join(dataDir, 'm') }, seed: { path: SEED } } });
        const rt = await createRuntime(config, silentLogger(), { embedder });
        const t0 = performance.now();
        const s =
          corpus === 'demo'
            ? await rt.ingestor.ingestPath(SEED, { collection: 'bench' })
            : await rt.ingestor.ingestLoaded(
                'bench',
                records.map((r) => ({
                  source: r.id,
                  loaded: { format: 'text', title: r.title ?? '', blocks: [{ kind: 'heading', level: 1, text: r.title ?? '' }, { kind: 'paragraph', text: r.text }], pageCount: null, effectiveDate: null, metadata: {} },
                  contentHash: r.id,
                  byteSize: r.text.length,
                })),
              );
        seconds.push((performance.now() - t0) / 1000);
        chunks = s.chunks.embedded + s.chunks.reused;
        if (s.failures.length > 0) throw new Error(`bench ingest failed: ${JSON.stringify(s.failures)}`);
        rt.close();
        rmSync(dataDir, { recursive: true, force: true });
      }
      row(corpus, 'full ingest (store + index)', name, 'chunks', chunks, median(seconds));
    }
  }
} finally {
  rmSync(tmp, { recursive: true, force: true });
}

if (args.json) {
  process.stdout.write(`${JSON.stringify({ machine, runs: RUNS, rows }, null, 2)}\n`);
} else {
  const out = [`machine: ${machine}; median of ${RUNS} runs (end-to-end: ${Math.min(RUNS, 3)})`, '', '| corpus | stage | embedder | count | median s | per second |', '|---|---|---|---:|---:|---:|'];
  for (const r of rows) out.push(`| ${r.corpus} | ${r.stage} | ${r.embedder} | ${r.count} ${r.unit} | ${r.seconds} | ${r.perSecond} ${r.unit}/s |`);
  process.stdout.write(`${out.join('\n')}\n`);
}
