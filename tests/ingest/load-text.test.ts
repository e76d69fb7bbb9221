import { readFile } from 'node:fs/promises';
import { describe, expect, it } from 'vitest';
import { decodeText, loadText, parseTextBlocks } from '../../src/ingest/load-text.js';

const fixture = new URL('../fixtures/ingest/lost-property.txt', import.meta.url);

describe('loadText', async () => {
  const doc = loadText(new Uint8Array(await readFile(fixture)), 'lost-property.txt');

  it('recognises ALL-CAPS, underlined and numbered headings with their levels', () => {
    expect(doc.blocks.filter((b) => b.kind === 'heading').map((b) => [b.level, b.text])).toEqual([
      [1, 'LOST PROPERTY'],
      [1, 'Handing In Items'],
      [1, '1. Scope'],
      [2, '2.1 Eligibility for return'],
      [2, 'Fees'],
    ]);
    expect(doc.title).toBe('LOST PROPERTY');
  });

  it('unwraps hard-wrapped paragraphs and keeps lists one item per line', () => {
    expect(doc.blocks).toContainEqual({ kind: 'paragraph', text: 'Staff hand items to the depot office at the end of their shift.' });
    expect(doc.blocks.filter((b) => b.kind === 'list').map((b) => b.text)).toEqual([
      '- Umbrellas: free\n- Phones: £2 handling charge, waived for concession holders',
      '1. Check the log\n2. Call the owner',
    ]);
  });

  it('finds the effective date in the text', () => {
    expect(doc.effectiveDate).toBe('2026-02-02');
  });

  it('does not take a sentence or a final numbered line for a heading', () => {
    expect(parseTextBlocks('1. Tickets are checked on board.\n\nMore text.').map((b) => b.kind)).toEqual(['list', 'paragraph']);
    expect(parseTextBlocks('Intro text.\n\n3. Appeals').map((b) => b.kind)).toEqual(['paragraph', 'list']);
  });
});

describe('decodeText', () => {
  const expected = 'Café tram — 5 €';

  it('decodes UTF-8 and strips its BOM', () => {
    const bytes = new Uint8Array([0xef, 0xbb, 0xbf, ...new TextEncoder().encode(expected)]);
    expect(decodeText(bytes)).toBe(expected);
  });

  it('decodes UTF-16 LE and BE by their BOM', () => {
    const le = Buffer.from('\ufeff' + expected, 'utf16le');
    expect(decodeText(new Uint8Array(le))).toBe(expected);
    const be = Buffer.from(le).swap16();
    expect(decodeText(new Uint8Array(be))).toBe(expected);
  });

  it('reads bytes that are not valid UTF-8 as Latin-1 (ISO-8859-1: 0xE9 = é, 0xA3 = £)', () => {
    const bytes = new Uint8Array([0x43, 0x61, 0x66, 0xe9, 0x20, 0xa3, 0x32]);
    expect(decodeText(bytes)).toBe('Café £2');
  });

  it('keeps a leader table one row per line instead of unwrapping it into a paragraph', () => {
    const blocks = parseTextBlocks('OFFICE HOURS\nHarbour Street ........ Mon-Fri 07:00-19:00\nNorth Quay ............ Sat 09:00-13:30\n\nStaff unwrap\nthis paragraph.');
    expect(blocks).toContainEqual({ kind: 'table', text: 'Harbour Street ........ Mon-Fri 07:00-19:00\nNorth Quay ............ Sat 09:00-13:30' });
    expect(blocks).toContainEqual({ kind: 'paragraph', text: 'Staff unwrap this paragraph.' });
  });
});
