import { readFile } from 'node:fs/promises';
import { describe, expect, it } from 'vitest';
import { loadMarkdown, parseMarkdownBlocks, stripInline } from '../../src/ingest/load-markdown.js';

const fixture = new URL('../fixtures/ingest/concession-passes.md', import.meta.url);

describe('loadMarkdown', async () => {
  const doc = loadMarkdown(new Uint8Array(await readFile(fixture)), 'concession-passes.md');

  it('reads front matter into metadata and takes the title and effective date from it', () => {
    expect(doc.metadata).toMatchObject({ title: 'Concession Passes', effective: '2026-03-01', version: '3', owner: 'Fares Team' });
    expect(doc.title).toBe('Concession Passes');
    expect(doc.effectiveDate).toBe('2026-03-01');
    expect(doc.format).toBe('markdown');
    expect(doc.pageCount).toBeNull();
  });

  it('finds ATX and setext headings with their levels', () => {
    expect(doc.blocks.filter((b) => b.kind === 'heading').map((b) => [b.level, b.text])).toEqual([
      [1, 'Concession passes (ignored title)'],
      [2, 'Who can apply'],
      [2, 'Prices'],
      [3, 'Replacement cards'],
    ]);
  });

  it('strips inline markup, links and images from paragraphs', () => {
    expect(doc.blocks[1]).toEqual({
      kind: 'paragraph',
      text: 'Marrowgate Valley Transit offers reduced fares to eligible passengers. See the fares page for prices.',
    });
    expect(doc.blocks.at(-1)!.text).toBe('A replacement costs £5 and takes 5 working days. snake_case_ids stay intact.');
  });

  it('keeps a list as one block with one item per line, continuation lines joined', () => {
    const lists = doc.blocks.filter((b) => b.kind === 'list').map((b) => b.text);
    expect(lists).toEqual([
      '- Residents aged 66 or over\n- Full-time students with a valid student card\n- Holders of a MVT-A access card',
      '1. Fill in form CP1.\n2. Post it to the depot.',
    ]);
  });

  it('keeps a pipe table as one block, one row per line, without the separator row', () => {
    const table = doc.blocks.find((b) => b.kind === 'table');
    expect(table?.text).toBe('Pass | Monthly | Annual\nSenior | £0.00 | £0.00\nStudent | £21.50 | £215 | capped');
  });

  it('keeps fenced code verbatim', () => {
    expect(doc.blocks.find((b) => b.kind === 'code')?.text).toBe('CP1 form ref: 2026/CP/1');
  });
});

describe('Markdown details', () => {
  it('falls back to the first h1 and then the file name for the title', () => {
    const enc = (s: string): Uint8Array => new TextEncoder().encode(s);
    expect(loadMarkdown(enc('Intro\n\n# Fares Guide\n\ntext'), 'x.md').title).toBe('Fares Guide');
    expect(loadMarkdown(enc('Just text.'), 'docs/tram-etiquette.md').title).toBe('tram-etiquette');
  });

  it('keeps a loose list (blank lines between items) as one block', () => {
    expect(parseMarkdownBlocks('- Buses\n\n- Trams\n\nAfter.')).toEqual([
      { kind: 'list', text: '- Buses\n- Trams' },
      { kind: 'paragraph', text: 'After.' },
    ]);
  });

  it('treats a lone --- as a rule, not a heading, and closes trailing hashes on ATX headings', () => {
    expect(parseMarkdownBlocks('---\n\n## Fares ##\nBody')).toEqual([
      { kind: 'heading', level: 2, text: 'Fares' },
      { kind: 'paragraph', text: 'Body' },
    ]);
  });

  it('reads front matter from a file with Windows line endings', () => {
    const doc = loadMarkdown(new TextEncoder().encode('---\r\ntitle: Night Buses\r\neffective_date: 2026-05-01\r\n---\r\nBody.\r\n'), 'n.md');
    expect([doc.title, doc.effectiveDate, doc.blocks.length]).toEqual(['Night Buses', '2026-05-01', 1]);
  });

  it('leaves arithmetic and inner underscores alone', () => {
    expect(stripInline('3 * 4 = 12, file_name and *stress* or __strong__')).toBe('3 * 4 = 12, file_name and stress or strong');
  });
});
