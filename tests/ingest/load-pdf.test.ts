import { describe, expect, it } from 'vitest';
import {
  ENCRYPTED_MESSAGE,
  headingShape,
  isLabelLine,
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

  it('counts the top and bottom edges apart, so a footer that repeats the title keeps the title on page 1', () => {
    const pages = [
      ['Plot Rules', 'Body one.', 'Plot Rules'],
      ['Body two.', 'More of two.', 'Plot Rules'],
      ['Body three.', 'More of three.', 'Plot Rules'],
    ];
    expect(removeRunningLines(pages)).toEqual([['Plot Rules', 'Body one.'], ['Body two.', 'More of two.'], ['Body three.', 'More of three.']]);
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

  it('joins a sentence cut by a page break into one paragraph that records both pages and where the second begins', () => {
    const blocks = pagesToBlocks([['This sentence runs on and on past the end of'], ['the page and ends here.']]);
    const text = 'This sentence runs on and on past the end of the page and ends here.';
    expect(blocks).toEqual([{ kind: 'paragraph', text, page: 1, pageEnd: 2, pageBreaks: [{ at: text.indexOf('the page'), page: 2 }] }]);
  });

  it('moves a page break with the text when clean-up drops characters before it', () => {
    // A soft hyphen (U+00AD) is removed by normalisation; the break must still open "the page".
    const blocks = pagesToBlocks([['This sentence runs on\u00AD and on past the end of'], ['the page and ends here.']]);
    const b = blocks[0]!;
    expect(b.text.slice(b.pageBreaks![0]!.at)).toBe('the page and ends here.');
  });

  it('takes a short sentence-case line between a finished sentence and prose as a sub-heading', () => {
    const long = 'Members renew their cards at any desk, and a renewal runs for one year from that day on.';
    const blocks = pagesToBlocks([['Lending rules', long, 'Late returns', long, 'Books come back to any branch of the service within the loan period shown.']]);
    expect(blocks.map((b) => [b.kind, b.text.slice(0, 14)])).toEqual([
      ['heading', 'Lending rules'],
      ['paragraph', long.slice(0, 14)],
      ['heading', 'Late returns'],
      ['paragraph', long.slice(0, 14)],
    ]);
  });

  it('leaves short lines that are not between a finished sentence and prose in the body', () => {
    const long = 'Members renew their cards at any desk, and a renewal runs for one year from that day on.';
    // After an unfinished line (a wrapped sentence) and before another short line (a grid).
    const wrapped = pagesToBlocks([[long, 'Cards that are lost are replaced for a small fee and', 'Replacement cards', long]]);
    expect(wrapped.some((b) => b.kind === 'heading' && b.text === 'Replacement cards')).toBe(false);
    const grid = pagesToBlocks([[long, 'Card type Fee', 'Adult card 2 pounds', 'Child card none', long]]);
    expect(grid.filter((b) => b.kind === 'heading')).toEqual([]);
  });

  it('accepts a label shape only for short capitalised lines without inner punctuation or an open ending', () => {
    expect(isLabelLine('Keys and gates', 70)).toBe(true);
    expect(isLabelLine('How long deposits are held', 70)).toBe(true);
    expect(isLabelLine('What happens if I am late?', 70)).toBe(true);
    expect(isLabelLine('Parking and', 70)).toBe(false);
    expect(isLabelLine('Wardens walk the site every evening', 20)).toBe(false);
    expect(isLabelLine('Next check: June 2028', 70)).toBe(false);
    expect(isLabelLine('Site Hut, Orchard Lane', 70)).toBe(false);
    expect(isLabelLine('see the table below', 70)).toBe(false);
    expect(isLabelLine('Cards are renewed at the desk for one year from the day', 90)).toBe(false);
  });

  it('nests a sentence-case sub-heading under the numbered section before it', () => {
    const long = 'Members renew their cards at any desk, and a renewal runs for one year from that day on.';
    const blocks = pagesToBlocks([['Library Guide', '1. Cards', long, 'Lost cards', long, '2. Loans', long]]);
    expect(blocks.filter((b) => b.kind === 'heading').map((b) => [b.text, b.level])).toEqual([
      ['Library Guide', 1],
      ['1. Cards', 2],
      ['Lost cards', 3],
      ['2. Loans', 2],
    ]);
  });

  it('keeps a numbered list item after an unfinished line in its list when no section is numbered beside it', () => {
    const blocks = pagesToBlocks([['Before a visit, staff always check the following items in this order', '1. Check the address book', '2. Check the diary for the day and the expected finish time of each visit.']]);
    expect(blocks.filter((b) => b.kind === 'heading')).toEqual([]);
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
