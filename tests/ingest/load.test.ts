import { describe, expect, it } from 'vitest';
import { SourceboundError } from '../../src/errors.js';
import { loadDocument } from '../../src/ingest/load.js';
import { buildNormalisedDocument } from '../../src/ingest/normalise.js';
import { buildPdf } from './pdf-fixture.js';

const enc = (s: string): Uint8Array => new TextEncoder().encode(s);

describe('loadDocument', () => {
  it('dispatches on content, so a PDF saved as .txt loads as a PDF with pages', async () => {
    const bytes = await buildPdf([{ lines: ['Tram Etiquette', 'Let passengers off first.'] }]);
    const doc = await loadDocument(bytes, 'etiquette.txt');
    expect(doc.format).toBe('pdf');
    expect(doc.blocks.every((b) => b.page === 1)).toBe(true);
  });

  it('loads Markdown, HTML and text to blocks the normaliser accepts unchanged', async () => {
    const cases: [string, string][] = [
      ['# Complaints\n\nWrite to us within 30 days.', 'complaints.md'],
      ['<!doctype html><h1>Complaints</h1><p>Write to us within 30 days.</p>', 'complaints.html'],
      ['COMPLAINTS\n\nWrite to us within 30 days.', 'complaints.txt'],
    ];
    for (const [source, name] of cases) {
      const doc = await loadDocument(enc(source), name);
      expect(doc.title.toLowerCase()).toBe('complaints');
      const normalised = buildNormalisedDocument(doc.blocks);
      expect(normalised.blocks.map((b) => b.text)).toEqual(doc.blocks.map((b) => b.text));
      expect(normalised.text).toBe(`${doc.blocks[0]!.text}\n\nWrite to us within 30 days.`);
    }
  });

  it('rejects unsupported content with SB_ERR_INGEST_UNSUPPORTED_TYPE', async () => {
    const err = await loadDocument(new Uint8Array([0, 1, 2, 3]), 'photo.txt').catch((e: unknown) => e);
    expect(err).toBeInstanceOf(SourceboundError);
    expect((err as SourceboundError).code).toBe('SB_ERR_INGEST_UNSUPPORTED_TYPE');
  });

  it('passes on the PDF loader\'s clear error for a .pdf that is not one', async () => {
    await expect(loadDocument(enc('just some words'), 'fake.pdf')).rejects.toThrow(/not a readable PDF/);
  });
});
