import { PDFDocument, StandardFonts } from 'pdf-lib';

/** One page of a generated PDF: body lines top to bottom (an empty string leaves a gap). */
export interface FixturePage {
  lines: string[];
}

export interface FixtureOptions {
  title?: string;
  header?: string;
  /** Footer template; "{n}" and "{total}" are replaced. */
  footer?: string;
}

/** Builds a text PDF with pdf-lib so tests need no binary fixtures. */
export async function buildPdf(pages: FixturePage[], opts: FixtureOptions = {}): Promise<Uint8Array> {
  const doc = await PDFDocument.create();
  if (opts.title) doc.setTitle(opts.title);
  const font = await doc.embedFont(StandardFonts.Helvetica);
  pages.forEach((p, i) => {
    const page = doc.addPage([595, 842]);
    if (opts.header) page.drawText(opts.header, { x: 50, y: 800, size: 9, font });
    let y = 760;
    for (const line of p.lines) {
      if (line !== '') page.drawText(line, { x: 50, y, size: 11, font });
      y -= line === '' ? 10 : 15;
    }
    if (opts.footer) {
      const text = opts.footer.replace('{n}', String(i + 1)).replace('{total}', String(pages.length));
      page.drawText(text, { x: 50, y: 40, size: 9, font });
    }
  });
  return doc.save();
}

/**
 * A one-page PDF whose trailer names an /Encrypt dictionary (ISO 32000-1 §7.6, standard security
 * handler, revision 2) with made-up /O and /U keys, so no password (not even the empty one) opens
 * it. Written by hand because pdf-lib cannot encrypt.
 */
export function buildEncryptedPdf(): Uint8Array {
  const objects = [
    '<< /Type /Catalog /Pages 2 0 R >>',
    '<< /Type /Pages /Kids [3 0 R] /Count 1 >>',
    '<< /Type /Page /Parent 2 0 R /MediaBox [0 0 595 842] /Contents 4 0 R >>',
    '<< /Length 0 >>\nstream\n\nendstream',
    `<< /Filter /Standard /V 1 /R 2 /O <${'ab'.repeat(32)}> /U <${'cd'.repeat(32)}> /P -44 >>`,
  ];
  let out = '%PDF-1.4\n';
  const offsets: number[] = [];
  objects.forEach((o, i) => {
    offsets.push(out.length);
    out += `${i + 1} 0 obj\n${o}\nendobj\n`;
  });
  const xref = out.length;
  out += `xref\n0 ${objects.length + 1}\n0000000000 65535 f \n`;
  out += offsets.map((o) => `${String(o).padStart(10, '0')} 00000 n \n`).join('');
  out += `trailer\n<< /Size ${objects.length + 1} /Root 1 0 R /Encrypt 5 0 R /ID [<${'11'.repeat(16)}> <${'11'.repeat(16)}>] >>\n`;
  out += `startxref\n${xref}\n%%EOF\n`;
  return new TextEncoder().encode(out);
}

/** A PDF whose pages hold only a drawn shape: what a scan without a text layer looks like to a text extractor. */
export async function buildImageOnlyPdf(): Promise<Uint8Array> {
  const doc = await PDFDocument.create();
  for (let i = 0; i < 2; i++) doc.addPage([595, 842]).drawRectangle({ x: 50, y: 50, width: 400, height: 600 });
  return doc.save();
}

export const HANDBOOK_HEADER = 'Marrowgate Valley Transit - Staff Handbook - Issue 4';
export const HANDBOOK_PAGE_3_SENTENCE = 'Report every faulty ticket machine to the depot controller before noon.';

/**
 * Three pages with a running header, a "Page N of 3" footer, a word hyphenated across a line end
 * ("supervi-" / "sor") on page 1, and a known sentence on page 3.
 */
export async function staffHandbookPdf(): Promise<Uint8Array> {
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
          HANDBOOK_PAGE_3_SENTENCE,
          'Effective from 1 March 2026.',
        ],
      },
    ],
    { title: 'MVT Staff Handbook', header: HANDBOOK_HEADER, footer: 'Page {n} of {total}' },
  );
}
