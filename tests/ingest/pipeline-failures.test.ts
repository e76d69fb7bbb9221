// Bad documents: each is reported with its reason in the ingest result, in the job record and in
// one warning log line; the good files of the same batch are indexed; a clean corpus logs no warning.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { loadConfig } from '../../src/config/index.js';
import { DOCX_OLE_MESSAGE } from '../../src/ingest/load-docx.js';
import { ENCRYPTED_MESSAGE, NO_TEXT_MESSAGE } from '../../src/ingest/load-pdf.js';
import { createLogger } from '../../src/logger.js';
import { createRuntime, ingestAsJob, type Runtime } from '../../src/runtime.js';
import { deepMerge, SEED_DIR, rawDb } from '../fixtures/runtime.js';
import { buildDocx } from './docx-fixture.js';
import { buildEncryptedPdf, buildImageOnlyPdf, staffHandbookPdf } from './pdf-fixture.js';

const LIMIT = 20_000;

interface LogLine {
  level: number;
  msg: string;
  source?: string;
  reason?: string;
}

let rt: Runtime;
let logs: LogLine[];
let dataDir: string;
let docs: string;

beforeEach(async () => {
  dataDir = mkdtempSync(path.join(tmpdir(), 'sb-fail-data-'));
  docs = mkdtempSync(path.join(tmpdir(), 'sb-fail-docs-'));
  logs = [];
  // Every line the pipeline writes, at every level, parsed back from pino's JSON output.
  const logger = createLogger('debug', { write: (line: string) => void logs.push(JSON.parse(line) as LogLine) });
  const config = loadConfig({
    env: {},
    overrides: deepMerge(
      { dataDir, embedding: { provider: 'hashing', modelDir: path.join(dataDir, 'models') }, seed: { path: SEED_DIR } },
      { limits: { documentMaxBytes: LIMIT } },
    ),
  });
  rt = await createRuntime(config, logger);
});
afterEach(() => {
  rt.close();
  rmSync(dataDir, { recursive: true, force: true });
  rmSync(docs, { recursive: true, force: true });
});

// pino's numeric levels: 40 is warn, 50 error, 60 fatal.
const WARN = 40;

describe('ingesting a folder of deliberately broken files', () => {
  it('indexes the good files and reports every bad one with its reason, in the result, the job record and the log', async () => {
    const para = 'Lost items are kept at the Central Depot for thirty days and then given to charity.';
    writeFileSync(path.join(docs, 'good.md'), `# Lost property\n\n${para}\n`);
    writeFileSync(path.join(docs, 'good.pdf'), await staffHandbookPdf());
    writeFileSync(path.join(docs, 'good.docx'), buildDocx([{ heading: 1, text: 'Complaints' }, { paragraph: 'Write to us within 30 days.' }]));
    // Exactly at the size limit: accepted.
    const atLimit = `AT THE LIMIT\n\n${'Trams run every ten minutes. '.repeat(LIMIT)}`.slice(0, LIMIT - 1) + '.';
    writeFileSync(path.join(docs, 'at-limit.txt'), atLimit);

    writeFileSync(path.join(docs, 'empty.txt'), '');
    writeFileSync(path.join(docs, 'binary.txt'), Buffer.from([0x7f, 0x45, 0x4c, 0x46, 0, 0, 0, 1, 2, 3, 0xff]));
    writeFileSync(path.join(docs, 'corrupt.pdf'), '%PDF-1.7\n1 0 obj << /Type /Catalog >>\ngarbage without xref');
    writeFileSync(path.join(docs, 'locked.pdf'), buildEncryptedPdf());
    writeFileSync(path.join(docs, 'scan.pdf'), await buildImageOnlyPdf());
    writeFileSync(path.join(docs, 'over-limit.txt'), `${atLimit}!`); // one byte past the limit
    writeFileSync(path.join(docs, 'cut.docx'), buildDocx([{ paragraph: para }]).slice(0, 400));
    const ole = new Uint8Array(1024);
    ole.set([0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1]);
    writeFileSync(path.join(docs, 'locked.docx'), ole);

    const s = await ingestAsJob(rt, 'ingest', 'c', { path: docs }, () => rt.ingestor.ingestPath(docs, { collection: 'c' }));

    expect(Buffer.byteLength(atLimit)).toBe(LIMIT);
    expect(s.documents).toMatchObject({ added: 4, failed: 8 });
    const reasons = Object.fromEntries(s.failures.map((f) => [f.source, f.reason]));
    expect(Object.keys(reasons).sort()).toEqual(
      ['binary.txt', 'corrupt.pdf', 'cut.docx', 'empty.txt', 'locked.docx', 'locked.pdf', 'over-limit.txt', 'scan.pdf'],
    );
    expect(reasons['empty.txt']).toBe('the file is empty');
    expect(reasons['binary.txt']).toBe('not a supported document (binary content or unknown type)');
    expect(reasons['corrupt.pdf']).toMatch(/^not a readable PDF \(corrupt or truncated file\)/);
    expect(reasons['locked.pdf']).toBe(ENCRYPTED_MESSAGE);
    expect(reasons['scan.pdf']).toBe(NO_TEXT_MESSAGE);
    expect(reasons['over-limit.txt']).toBe(`file is ${LIMIT + 1} bytes, over the limit of ${LIMIT}`);
    expect(reasons['cut.docx']).toMatch(/^not a readable DOCX \(corrupt file or not a Word document\)/);
    expect(reasons['locked.docx']).toBe(DOCX_OLE_MESSAGE);

    const sources = rt.repo.listDocuments('c').map((d) => d.source).sort();
    expect(sources).toEqual(['at-limit.txt', 'good.docx', 'good.md', 'good.pdf']);

    // The CLI records each ingest as a job; the failures must be readable from the jobs table later.
    const row = rawDb(rt).prepare("SELECT state, result FROM jobs WHERE kind = 'ingest' ORDER BY created_at DESC LIMIT 1").get() as {
      state: string;
      result: string;
    };
    expect(row.state).toBe('succeeded');
    const stored = JSON.parse(row.result) as typeof s;
    expect(stored.failures).toEqual(s.failures);
    expect(stored.documents).toEqual(s.documents);

    const warnings = logs.filter((l) => l.level >= WARN);
    expect(warnings.map((w) => [w.source, w.reason])).toEqual(s.failures.map((f) => [f.source, f.reason]));
  });

  it('keeps a document indexed when its file is replaced by an encrypted one', async () => {
    writeFileSync(path.join(docs, 'handbook.pdf'), await staffHandbookPdf());
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const before = rt.repo.chunksOfCollection('c').length;
    writeFileSync(path.join(docs, 'handbook.pdf'), buildEncryptedPdf());
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.failures).toEqual([{ source: 'handbook.pdf', reason: ENCRYPTED_MESSAGE }]);
    expect(rt.repo.chunksOfCollection('c').length).toBe(before);
    const hits = await rt.retriever.search({ query: 'faulty ticket machine', collection: 'c', k: 1, mode: 'lexical' });
    expect(hits[0]?.page).toBe(3);
  });
});

describe('ingesting the demo corpus', () => {
  it('logs no warning or error at all and fails no document', async () => {
    const s = await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
    expect(s.failures).toEqual([]);
    expect(s.documents.added).toBeGreaterThanOrEqual(12);
    expect(logs.length).toBeGreaterThan(0); // the capture works: debug lines per document arrive
    expect(logs.filter((l) => l.level >= WARN)).toEqual([]);
  });

  it('keeps the version each policy states, from front matter or an "issue N" clause', async () => {
    await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
    const versions = Object.fromEntries(rt.repo.listDocuments('default').map((d) => [d.source, d.metadata['version'] ?? null]));
    expect(versions).toMatchObject({
      'delay-refunds-2025.md': '1',
      'delay-refunds-2026.md': '2',
      'staff-handbook.pdf': '3',
      'tram-depot-safety-procedures.pdf': '5',
      'conditions-of-carriage.txt': '4',
      'lost-property.md': null,
    });
  });
});
