import { readFile } from 'node:fs/promises';
import { describe, expect, it } from 'vitest';
import { loadHtml } from '../../src/ingest/load-html.js';

const fixture = new URL('../fixtures/ingest/bikes-on-board.html', import.meta.url);
const enc = (s: string): Uint8Array => new TextEncoder().encode(s);

describe('loadHtml', async () => {
  const doc = loadHtml(new Uint8Array(await readFile(fixture)), 'bikes-on-board.html');
  const all = doc.blocks.map((b) => b.text).join('\n');

  it('drops scripts, styles, navigation, site header and footer, forms, asides and hidden elements', () => {
    expect(all).not.toContain('SHOULD NOT APPEAR');
    expect(all).not.toContain('NAVLINK');
  });

  it('takes the title from <title> with entities decoded, plus meta tags as metadata', () => {
    expect(doc.title).toBe('Bikes on Board & Scooters');
    expect(doc.metadata).toMatchObject({ effective: '2026-04-06', lang: 'en-GB' });
    expect(doc.effectiveDate).toBe('2026-04-06');
  });

  it('maps headings, paragraphs, tables, lists and pre to blocks in reading order', () => {
    expect(doc.blocks.map((b) => b.kind)).toEqual(['heading', 'paragraph', 'heading', 'paragraph', 'table', 'heading', 'list', 'code']);
    expect(doc.blocks[0]).toEqual({ kind: 'heading', level: 1, text: 'Bikes on board' });
    // &#8209; → U+2011 and &mdash; → U+2014 (HTML character references); &nbsp; (U+00A0) is
    // then normalised to a plain space.
    expect(doc.blocks[1]!.text).toBe('Folded bikes travel free at any time. Full-size bikes ride off\u2011peak only \u2014 see below.');
  });

  it('keeps every table row, cells joined with " | "', () => {
    expect(doc.blocks.find((b) => b.kind === 'table')?.text).toBe(
      'Service | Weekdays | Weekends\nTram | after 09:30 | any time\nBus | not allowed | any time',
    );
  });

  it('renders lists one item per line with nesting and keeps pre text as code', () => {
    expect(doc.blocks.find((b) => b.kind === 'list')?.text).toBe(
      '1. Board at the rear door.\n2. Give way to wheelchair users\n - and buggies',
    );
    // Normalisation folds indentation to one space, in code too.
    expect(doc.blocks.find((b) => b.kind === 'code')?.text).toBe('Rule 14(b)\n applies');
  });

  it('reads the whole body when there is no main or article, and falls back to the first h1 for a title', () => {
    const d = loadHtml(enc('<html><body><nav>Menu</nav><h1>Complaints</h1>Loose text<br>second line<p>Para.</p></body></html>'), 'c.html');
    expect(d.title).toBe('Complaints');
    expect(d.blocks).toEqual([
      { kind: 'heading', level: 1, text: 'Complaints' },
      { kind: 'paragraph', text: 'Loose text\nsecond line' },
      { kind: 'paragraph', text: 'Para.' },
    ]);
  });
});
