import { cpSync, mkdtempSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { Runtime } from '../../src/runtime.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

let rt: Runtime;
let cleanup: () => void;
let docs: string;

beforeEach(async () => {
  ({ rt, cleanup } = await tempRuntime());
  docs = mkdtempSync(path.join(tmpdir(), 'sb-docs-'));
});
afterEach(() => {
  cleanup();
  rmSync(docs, { recursive: true, force: true });
});

const para = (topic: string) =>
  `Passengers asking about ${topic} should be told the rules below. The ${topic} desk opens at 08:00 on weekdays.`;

describe('the ingest pipeline', () => {
  it('ingests the demo corpus with no failures and records page numbers for PDFs', async () => {
    const s = await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
    expect(s.documents.failed).toBe(0);
    expect(s.failures).toEqual([]);
    expect(s.documents.added).toBeGreaterThanOrEqual(12);
    const pdf = rt.repo.listDocuments('default').find((d) => d.format === 'pdf')!;
    expect(pdf.pageCount).toBeGreaterThan(1);
    const chunks = rt.repo.chunkViews(rt.repo.chunksOfCollection('default').map((c) => c.id));
    const pdfChunks = [...chunks.values()].filter((c) => c.documentId === pdf.id);
    expect(pdfChunks.every((c) => c.pageStart !== null && c.pageStart >= 1)).toBe(true);
    expect(new Set(pdfChunks.map((c) => c.pageStart)).size).toBeGreaterThan(1);
  });

  it('stores chunk offsets that map back to exactly the chunk text', async () => {
    await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
    const views = rt.repo.chunkViews(rt.repo.chunksOfCollection('default').map((c) => c.id));
    for (const v of views.values()) {
      const text = rt.repo.getDocumentText(v.documentId)!;
      expect(text.slice(v.start, v.end)).toBe(v.text);
    }
  });

  it('embeds nothing when the folder has not changed', async () => {
    writeFileSync(path.join(docs, 'a.md'), `# Lost property\n\n${para('lost property')}\n`);
    writeFileSync(path.join(docs, 'b.txt'), para('season tickets'));
    const first = await rt.ingestor.ingestPath(docs, { collection: 'c' });
    expect(first.documents.added).toBe(2);
    expect(first.chunks.embedded).toBeGreaterThan(0);
    const second = await rt.ingestor.reindex({ collection: 'c' });
    expect(second.documents).toMatchObject({ added: 0, updated: 0, unchanged: 2, removed: 0 });
    expect(second.chunks.embedded).toBe(0);
  });

  it('re-processes a changed file, reusing vectors of unchanged chunk text', async () => {
    const sections = ['fares', 'refunds', 'bikes', 'dogs'].map((t) => `## ${t}\n\n${para(t)}`).join('\n\n');
    writeFileSync(path.join(docs, 'a.md'), `# Policy\n\n${sections}\n`);
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    writeFileSync(path.join(docs, 'a.md'), `# Policy\n\n${sections.replace('The bikes desk opens at 08:00', 'The bikes desk opens at 09:30')}\n`);
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents.updated).toBe(1);
    expect(s.chunks.embedded).toBeGreaterThan(0);
    expect(s.chunks.reused).toBeGreaterThan(0);
    const hits = await rt.retriever.search({ query: 'bikes desk 09:30', collection: 'c', k: 3, mode: 'lexical' });
    expect(hits[0]!.text).toContain('09:30');
  });

  it('removes a deleted file from search on reindex', async () => {
    writeFileSync(path.join(docs, 'a.txt'), para('lost umbrellas'));
    writeFileSync(path.join(docs, 'b.txt'), para('season tickets'));
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    rmSync(path.join(docs, 'a.txt'));
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents.removed).toBe(1);
    for (const mode of ['lexical', 'dense', 'hybrid'] as const) {
      const hits = await rt.retriever.search({ query: 'umbrellas', collection: 'c', k: 10, mode });
      expect(hits.every((h) => h.source !== 'a.txt'), mode).toBe(true);
    }
  });

  it('reports each bad file with its reason and ingests the rest', async () => {
    writeFileSync(path.join(docs, 'good.md'), `# Good\n\n${para('fares')}`);
    writeFileSync(path.join(docs, 'empty.txt'), '');
    writeFileSync(path.join(docs, 'binary.txt'), Buffer.from([0, 1, 2, 3, 0, 0, 255, 254, 0, 7]));
    writeFileSync(path.join(docs, 'broken.pdf'), '%PDF-1.7\nthis is not really a pdf');
    const s = await rt.ingestor.ingestPath(docs, { collection: 'c' });
    expect(s.documents.added).toBe(1);
    expect(s.documents.failed).toBe(3);
    const reasons = Object.fromEntries(s.failures.map((f) => [f.source, f.reason]));
    expect(reasons['empty.txt']).toMatch(/empty/);
    expect(reasons['binary.txt']).toMatch(/binary|not a supported/i);
    expect(reasons['broken.pdf']).toBeTruthy();
  });

  it('keeps what was indexed when a file later becomes unreadable', async () => {
    writeFileSync(path.join(docs, 'a.pdf'), '%PDF-1.7 broken');
    cpSync(path.join(SEED_DIR, 'lost-property.md'), path.join(docs, 'lost.md'));
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const before = rt.repo.countDocuments('c');
    writeFileSync(path.join(docs, 'lost.md'), Buffer.from([0, 0, 0, 1, 2, 3]));
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents.failed).toBe(2);
    expect(rt.repo.countDocuments('c')).toBe(before);
    const hits = await rt.retriever.search({ query: 'lost property', collection: 'c', k: 3, mode: 'lexical' });
    expect(hits[0]!.source).toBe('lost.md');
  });

  it('refuses to add documents to a collection indexed with another embedder', async () => {
    writeFileSync(path.join(docs, 'a.txt'), para('fares'));
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    rt.repo.setCollectionEmbedder('c', 'some-other-model', 384);
    await expect(rt.ingestor.ingestPath(docs, { collection: 'c' })).rejects.toThrow(/reindex --full/);
    await expect(rt.retriever.search({ query: 'fares', collection: 'c', k: 3, mode: 'hybrid' })).rejects.toMatchObject({
      code: 'SB_ERR_EMBEDDER_MISMATCH',
    });
    // Lexical search does not compare vectors, so it still answers.
    expect((await rt.retriever.search({ query: 'fares', collection: 'c', k: 3, mode: 'lexical' })).length).toBeGreaterThan(0);
  });

  it('skips files that are not documents without reporting them as failures', async () => {
    writeFileSync(path.join(docs, 'a.txt'), para('fares'));
    writeFileSync(path.join(docs, 'script.mjs'), 'export {}');
    writeFileSync(path.join(docs, 'data.json'), '{}');
    const s = await rt.ingestor.ingestPath(docs, { collection: 'c' });
    expect(s.documents.added).toBe(1);
    expect(s.documents.failed).toBe(0);
  });

  it('treats a file moved within the folder as a rename: no document added or removed, nothing embedded', async () => {
    writeFileSync(path.join(docs, 'a.md'), `# Fares\n\n${para('fares')}`);
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    renameSync(path.join(docs, 'a.md'), path.join(docs, 'renamed.md'));
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents).toMatchObject({ added: 0, renamed: 1, removed: 0 });
    expect(s.chunks.embedded).toBe(0);
  });
});
