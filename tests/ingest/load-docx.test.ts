import { describe, expect, it } from 'vitest';
import { detectFormat } from '../../src/ingest/detect.js';
import { DOCX_OLE_MESSAGE, loadDocx } from '../../src/ingest/load-docx.js';
import { loadDocument } from '../../src/ingest/load.js';
import { buildNormalisedDocument } from '../../src/ingest/normalise.js';
import { buildDocx, crc32, zipStored } from './docx-fixture.js';

const refunds = buildDocx([
  { heading: 1, text: 'Delay Refunds' },
  { paragraph: 'Version 2.1' },
  { paragraph: 'This policy is effective from 1 May 2026 and applies to all trams and buses.' },
  { heading: 2, text: 'Eligibility' },
  { bullets: ['Trams arriving 15 minutes late or more', 'Buses arriving 30 minutes late or more'] },
  { heading: 2, text: 'How to claim' },
  { steps: ['Keep the ticket or pass.', 'Fill in the refund form within 28 days.'] },
  { heading: 3, text: 'Refund amounts' },
  { table: [['Delay', 'Refund'], ['15 to 29 minutes', '25%'], ['30 minutes or more', '50%']] },
]);

describe('the DOCX fixture writer', () => {
  it('computes the CRC-32 check value ZIP expects', () => {
    // "123456789" → 0xCBF43926, the published check value of CRC-32/ISO-HDLC (the ZIP CRC),
    // as listed in the CRC RevEng catalogue of parametrised CRC algorithms.
    expect(crc32(new TextEncoder().encode('123456789'))).toBe(0xcbf43926);
  });

  it('writes a ZIP that starts with a local file header and ends with the end-of-central-directory record', () => {
    const zip = zipStored([{ name: 'a.txt', data: 'x' }]);
    expect([...zip.subarray(0, 4)]).toEqual([0x50, 0x4b, 0x03, 0x04]);
    expect([...zip.subarray(zip.length - 22, zip.length - 18)]).toEqual([0x50, 0x4b, 0x05, 0x06]);
  });
});

describe('loadDocx', async () => {
  const doc = await loadDocx(refunds, 'delay-refunds.docx');

  it('keeps heading levels from the Heading 1-3 paragraph styles', () => {
    expect(doc.blocks.filter((b) => b.kind === 'heading').map((b) => [b.level, b.text])).toEqual([
      [1, 'Delay Refunds'],
      [2, 'Eligibility'],
      [2, 'How to claim'],
      [3, 'Refund amounts'],
    ]);
  });

  it('keeps bulleted and numbered lists as list blocks, one item a line', () => {
    const lists = doc.blocks.filter((b) => b.kind === 'list').map((b) => b.text);
    expect(lists).toEqual([
      '- Trams arriving 15 minutes late or more\n- Buses arriving 30 minutes late or more',
      '1. Keep the ticket or pass.\n2. Fill in the refund form within 28 days.',
    ]);
  });

  it('keeps a table one row a line with cells apart', () => {
    const table = doc.blocks.find((b) => b.kind === 'table');
    expect(table?.text).toBe('Delay | Refund\n15 to 29 minutes | 25%\n30 minutes or more | 50%');
  });

  it('takes title, effective date and version from the text, and records the source format', () => {
    expect(doc.title).toBe('Delay Refunds');
    expect(doc.effectiveDate).toBe('2026-05-01');
    expect(doc.metadata).toMatchObject({ version: '2.1', source_format: 'docx' });
    expect(doc.pageCount).toBeNull();
  });

  it('gives blocks the normaliser accepts unchanged, with the heading path under each', () => {
    const normalised = buildNormalisedDocument(doc.blocks);
    expect(normalised.blocks.map((b) => b.text)).toEqual(doc.blocks.map((b) => b.text));
    const table = normalised.blocks.find((b) => b.kind === 'table')!;
    expect(table.headingPath).toEqual(['Delay Refunds', 'How to claim', 'Refund amounts']);
  });

  it('is chosen from the content, whatever the file is called', async () => {
    expect(detectFormat(refunds, 'refunds.docx')).toBe('docx');
    expect(detectFormat(refunds, 'refunds')).toBe('docx');
    const loaded = await loadDocument(refunds, 'download.bin');
    expect(loaded.title).toBe('Delay Refunds');
  });

  it('says a damaged file is not a readable DOCX', async () => {
    await expect(loadDocx(refunds.slice(0, 300), 'cut.docx')).rejects.toThrow(/^not a readable DOCX \(corrupt file or not a Word document\)/);
    await expect(loadDocument(new TextEncoder().encode('plain words'), 'renamed.docx')).rejects.toThrow(/not a readable DOCX/);
  });

  it('says why a password-protected Word file cannot be read', async () => {
    // Encrypted OOXML is stored in an OLE compound file (MS-OFFCRYPTO §2.3.4.1), magic D0 CF 11 E0 A1 B1 1A E1 (MS-CFB §2.2).
    const ole = new Uint8Array(512);
    ole.set([0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1]);
    expect(detectFormat(ole, 'locked.docx')).toBe('docx');
    expect(detectFormat(ole, 'locked.txt')).toBeNull();
    await expect(loadDocument(ole, 'locked.docx')).rejects.toThrow(DOCX_OLE_MESSAGE);
  });

  it('does not mistake another ZIP archive for a Word file', () => {
    const other = zipStored([{ name: 'timetable.csv', data: 'route,first\n7,05:40' }]);
    expect(detectFormat(other, 'timetables.zip')).toBeNull();
    expect(detectFormat(other, 'notes.txt')).toBeNull();
  });
});
