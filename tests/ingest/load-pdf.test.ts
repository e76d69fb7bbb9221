import { describe, expect, it } from 'vitest';
import {
  ENCRYPTED_MESSAGE,
  headingShape,
  loadPdf,
  NO_TEXT_MESSAGE,
  pagesToBlocks,
  rejoinHyphenated,
  removeRunningLines,
} from '../../src/ingest/load-pdf.js';
import { buildEncryptedPdf, buildPdf } from './pdf-fixture.js';

const HEADER = 'Marrowgate Valley Transit - Staff Handbook - Issue 4';
const PAGE_3_SENTENCE = 'Report every faulty ticket machine to the depot controller before noon.';

async function handbook(): Promise<Uint8Array> {
  return buildPdf(
    [
      {
        lines: [
          'Staff Handbook',
          '1. Uniform',
          'Every driver and conductor wears the issued uniform while on duty, including the',
          'reflective jacket at stops after dark. Lost items are replaced by the shift supervi-',
          'sor on request.',
          'Name badges are worn on the left side of the jacket and must stay visible to',
          'passengers at all times.',
        ],
      },
      {
        lines: [
          '2. Breaks',
          'Drivers take a break of at least thirty minutes after four and a half hours of',
          'driving. Breaks are recorded on the duty card before the next departure time.',
        ],
      },
      {
        lines: [
          '3. Reporting Faults',
          'Faults found during a shift are logged on the vehicle defect sheet straight away.',
          PAGE_3_SENTENCE,
          'Effective from 1 March 2026.',
        ],
      },
    ],
    { title: 'MVT Staff Handbook', header: HEADER, footer: 'Page {n} of {total}' },
  );
}

describe('loadPdf', async () => {
  const bytes = await handbook();
  const doc = await loadPdf(bytes, 'staff-handbook.pdf');
  const all = doc.blocks.map((b) => b.text).join('\n');

  it('removes the running header and the "Page N of M" footer from every page', () => {
    expect(all).not.toContain('Staff Handbook - Issue');
    expect(all).not.toMatch(/Page \d of 3/);
  });

  it('rejoins a word hyphenated across a line end', () => {
    expect(all).toContain('replaced by the shift supervisor on request.');
    expect(all).not.toContain('supervi-');
  });

  it('puts the sentence from page 3 in a block marked page 3', () => {
    const block = doc.blocks.find((b) => b.text.includes(PAGE_3_SENTENCE));
    expect(block?.page).toBe(3);
  });

  it('groups wrapped lines into paragraphs and finds numbered headings under the title', () => {
    expect(doc.blocks.map((b) => [b.kind, b.level ?? null, b.page, b.text.slice(0, 24)])).toEqual([
      ['heading', 1, 1, 'Staff Handbook'],
      ['heading', 2, 1, '1. Uniform'],
      ['paragraph', null, 1, 'Every driver and conduct'],
      ['paragraph', null, 1, 'Name badges are worn on '],
      ['heading', 2, 2, '2. Breaks'],
      ['paragraph', null, 2, 'Drivers take a break of '],
      ['heading', 2, 3, '3. Reporting Faults'],
      // Full-width lines that end in a full stop are indistinguishable from wrapped ones, so
      // page 3's three lines stay one paragraph.
      ['paragraph', null, 3, 'Faults found during a sh'],
    ]);
  });

  it('reports page count, info title, metadata and effective date', () => {
    expect(doc.pageCount).toBe(3);
    expect(doc.title).toBe('MVT Staff Handbook');
    expect(doc.metadata['title']).toBe('MVT Staff Handbook');
    expect(doc.effectiveDate).toBe('2026-03-01');
    expect(doc.format).toBe('pdf');
  });

  it('leaves the caller\'s bytes usable (the PDF library detaches what it is given)', () => {
    expect(bytes.byteLength).toBeGreaterThan(0);
    expect(Buffer.from(bytes.subarray(0, 5)).toString('latin1')).toBe('%PDF-');
  });

  it('throws a clear error for a corrupt PDF', async () => {
    const corrupt = new TextEncoder().encode('%PDF-1.7\n1 0 obj << /Type /Catalog >>\ngarbage without xref');
    await expect(loadPdf(corrupt, 'broken.pdf')).rejects.toThrow(/not a readable PDF \(corrupt or truncated file\)/);
  });

  it('throws the OCR message for a PDF without any text', async () => {
    const blank = await buildPdf([{ lines: [] }, { lines: [] }]);
    await expect(loadPdf(blank, 'scan.pdf')).rejects.toThrow(NO_TEXT_MESSAGE);
    expect(NO_TEXT_MESSAGE).toBe('no extractable text (scanned image? OCR is not supported)');
  });

  it('says that an encrypted PDF is not supported, from pdf.js\'s PasswordException', async () => {
    // The trailer's /Encrypt entry makes pdf.js ask for a password (ISO 32000-1 §7.6.3).
    await expect(loadPdf(buildEncryptedPdf(), 'locked.pdf')).rejects.toThrow(ENCRYPTED_MESSAGE);
    expect(ENCRYPTED_MESSAGE).toBe('encrypted PDF (password protected) is not supported');
  });

  it('takes the version from the running header that clean-up removes', () => {
    // The handbook's header reads "... - Issue 4" on every page; the body states no version.
    expect(doc.metadata['version']).toBe('4');
    expect(all).not.toContain('Issue 4');
  });

  it('falls back to the first heading, then the file name, for the title', async () => {
    const untitled = await loadPdf(await buildPdf([{ lines: ['Night Services', 'Trams run until midnight.'] }]), 'night.pdf');
    expect(untitled.title).toBe('Night Services');
    const plain = await loadPdf(await buildPdf([{ lines: ['trams run until midnight.'] }]), 'docs/night-services.pdf');
    expect(plain.title).toBe('night-services');
  });
});

describe('PDF text clean-up', () => {
  it('drops edge lines repeating on at least half the pages, with digits ignored', () => {
    const pages = [
      ['Fares Policy 2026', 'Body one.', 'Footer 1'],
      ['Fares Policy 2026', 'Body two.', 'Footer 2'],
      ['Something else', 'Body three.', 'Footer 3'],
      ['Fares Policy 2026', 'Body four.', '- 4 -'],
    ];
    expect(removeRunningLines(pages)).toEqual([['Body one.'], ['Body two.'], ['Something else', 'Body three.'], ['Body four.']]);
  });

  it('keeps a one-page document\'s edge lines except bare page numbers', () => {
    expect(removeRunningLines([['Title line', 'Body.', 'Page 1 of 1']])).toEqual([['Title line', 'Body.']]);
  });

  it('joins only lower-case hyphenation and keeps real compound breaks', () => {
    expect(rejoinHyphenated(['the shift supervi-', 'sor on duty', 'Park-', 'Ride tickets'])).toEqual([
      'the shift supervisor',
      'on duty',
      'Park-',
      'Ride tickets',
    ]);
  });

  it('recognises numbered, Title Case and ALL-CAPS headings but not sentences', () => {
    expect(headingShape('3.2 Refund Amounts')).toBe(2);
    expect(headingShape('Bikes on Trams and Buses')).toBe(0);
    expect(headingShape('LOST PROPERTY')).toBe(0);
    expect(headingShape('Refunds are paid within 14 days.')).toBeNull();
    expect(headingShape('the service runs hourly')).toBeNull();
  });

  it('keeps runs of short unpunctuated lines as table rows and numbered steps as a list', () => {
    const long = 'Personal protective equipment must be worn in every work area of the depot';
    const blocks = pagesToBlocks([
      [
        long,
        'as shown in the grid below.',
        'Area Hi-vis Boots Helmet',
        'Depot yard Yes Yes No',
        'Track work Yes Yes Yes',
        'Isolation follows these steps, in this order, before any work starts on the line:',
        '1. Request the isolation from Tram Control and agree the section to be',
        'isolated.',
        '2. Lock off the section switch.',
        'Work must not start until the permit has been signed by both people here.',
        'Short end.',
      ],
    ]);
    expect(blocks.map((b) => [b.kind, b.text])).toEqual([
      ['paragraph', `${long} as shown in the grid below.`],
      ['table', 'Area Hi-vis Boots Helmet\nDepot yard Yes Yes No\nTrack work Yes Yes Yes'],
      ['paragraph', 'Isolation follows these steps, in this order, before any work starts on the line:'],
      ['list', '1. Request the isolation from Tram Control and agree the section to be isolated.\n2. Lock off the section switch.'],
      ['paragraph', 'Work must not start until the permit has been signed by both people here. Short end.'],
    ]);
  });

  it('finds a numbered heading after a full-width line that ends a sentence', () => {
    const blocks = pagesToBlocks([
      [
        'The Customer Contact Centre is staffed every day, so rosters include weekends.',
        '3. Annual leave',
        'Full-time employees receive 30 days of annual leave each year, including holidays.',
      ],
    ]);
    expect(blocks.map((b) => b.kind)).toEqual(['paragraph', 'heading', 'paragraph']);
  });

  it('joins a sentence cut by a page break into one paragraph that records both pages', () => {
    const blocks = pagesToBlocks([['This sentence runs on and on past the end of'], ['the page and ends here.']]);
    expect(blocks).toEqual([{ kind: 'paragraph', text: 'This sentence runs on and on past the end of the page and ends here.', page: 1, pageEnd: 2 }]);
  });

  it('keeps paragraphs apart at a page break when the first ends a sentence or the next starts a new one', () => {
    const ended = pagesToBlocks([['The first page ends with a whole sentence.'], ['the next page starts in lower case.']]);
    expect(ended.map((b) => [b.page, b.pageEnd])).toEqual([[1, undefined], [2, undefined]]);
    const fresh = pagesToBlocks([['A heading-free page that stops mid-way through'], ['Another paragraph starts here.']]);
    expect(fresh.map((b) => b.page)).toEqual([1, 2]);
  });
});

describe('PDF page and time limits', () => {
  // Each page holds its own sentence, told apart by letters (digits alone would make every line look like
  // a running header), so page order and completeness can be checked.
  const tag = (i: number) => String.fromCharCode(97 + (i % 26)).repeat(1 + Math.floor(i / 26));
  const numbered = (n: number) =>
    buildPdf(Array.from({ length: n }, (_, i) => ({ lines: [`Timetable note ${tag(i)} is printed on this page.`] })));

  it('reads every page of a PDF longer than one parsing batch, in order', async () => {
    const doc = await loadPdf(await numbered(35), 'notes.pdf');
    expect(doc.pageCount).toBe(35);
    const pages = doc.blocks.map((b) => b.page);
    expect(pages).toEqual(Array.from({ length: 35 }, (_, i) => i + 1));
    expect(doc.blocks[34]!.text).toBe(`Timetable note ${tag(34)} is printed on this page.`);
  });

  it('refuses a PDF with more pages than the limit, naming the limit', async () => {
    await expect(loadPdf(await numbered(5), 'long.pdf', { maxPages: 4, maxSeconds: 60 })).rejects.toThrow(
      'PDF has 5 pages, over the limit of 4 (limits.pdfMaxPages)',
    );
  });

  it('stops reading when the time budget runs out, naming the limit', async () => {
    let t = 0;
    // A clock that moves 3 s per look: the budget of 5 s is spent after the first batch.
    const clock = () => (t += 3000);
    await expect(loadPdf(await numbered(40), 'slow.pdf', { maxPages: 100, maxSeconds: 5 }, clock)).rejects.toThrow(
      /took longer than 5 s \(limits\.pdfMaxSeconds\); 16 of 40 pages read/,
    );
  });
});
