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
