// Builds .docx files in memory so tests need no binary fixtures. A .docx is a ZIP archive of XML
// parts (ECMA-376 Office Open XML, Part 2: Open Packaging Conventions); the writer below stores
// entries uncompressed, which the ZIP format allows (PKWARE APPNOTE.TXT, compression method 0), with the
// service's own ZIP writer (src/ingest/zip.ts).

import { writeStoredZip } from '../../src/ingest/zip.js';

export { crc32 } from '../../src/ingest/zip.js';

/** A ZIP archive of uncompressed entries, in the given order. */
export function zipStored(entries: { name: string; data: Uint8Array | string }[]): Uint8Array {
  const enc = new TextEncoder();
  return writeStoredZip(entries.map((e) => ({ name: enc.encode(e.name), data: typeof e.data === 'string' ? enc.encode(e.data) : e.data })));
}

const W = 'http://schemas.openxmlformats.org/wordprocessingml/2006/main';

function esc(s: string): string {
  return s.replace(/&/g, '&amp;').replace(/</g, '&lt;').replace(/>/g, '&gt;');
}

/** Body content of the fixture document, in reading order. */
export type DocxPart =
  | { heading: 1 | 2 | 3; text: string }
  | { paragraph: string }
  | { bullets: string[] }
  | { steps: string[] }
  | { table: string[][] };

function run(text: string): string {
  return `<w:r><w:t xml:space="preserve">${esc(text)}</w:t></w:r>`;
}

function para(text: string, style?: string, numId?: number): string {
  const props: string[] = [];
  if (style) props.push(`<w:pStyle w:val="${style}"/>`);
  if (numId !== undefined) props.push(`<w:numPr><w:ilvl w:val="0"/><w:numId w:val="${numId}"/></w:numPr>`);
  return `<w:p>${props.length > 0 ? `<w:pPr>${props.join('')}</w:pPr>` : ''}${run(text)}</w:p>`;
}

function bodyXml(parts: DocxPart[]): string {
  return parts
    .map((p) => {
      if ('heading' in p) return para(p.text, `Heading${p.heading}`);
      if ('paragraph' in p) return para(p.paragraph);
      if ('bullets' in p) return p.bullets.map((t) => para(t, 'ListParagraph', 1)).join('');
      if ('steps' in p) return p.steps.map((t) => para(t, 'ListParagraph', 2)).join('');
      const rows = p.table.map((r) => `<w:tr>${r.map((c) => `<w:tc>${para(c)}</w:tc>`).join('')}</w:tr>`).join('');
      return `<w:tbl>${rows}</w:tbl>`;
    })
    .join('');
}

const STYLES = `<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<w:styles xmlns:w="${W}">
<w:style w:type="paragraph" w:styleId="Heading1"><w:name w:val="heading 1"/></w:style>
<w:style w:type="paragraph" w:styleId="Heading2"><w:name w:val="heading 2"/></w:style>
<w:style w:type="paragraph" w:styleId="Heading3"><w:name w:val="heading 3"/></w:style>
<w:style w:type="paragraph" w:styleId="ListParagraph"><w:name w:val="List Paragraph"/></w:style>
</w:styles>`;

// numId 1 is a bulleted list, numId 2 a decimal one.
const NUMBERING = `<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<w:numbering xmlns:w="${W}">
<w:abstractNum w:abstractNumId="0"><w:lvl w:ilvl="0"><w:numFmt w:val="bullet"/></w:lvl></w:abstractNum>
<w:abstractNum w:abstractNumId="1"><w:lvl w:ilvl="0"><w:numFmt w:val="decimal"/></w:lvl></w:abstractNum>
<w:num w:numId="1"><w:abstractNumId w:val="0"/></w:num>
<w:num w:numId="2"><w:abstractNumId w:val="1"/></w:num>
</w:numbering>`;

/** A minimal but complete Word document: content types, package and part relationships, styles, numbering. */
export function buildDocx(parts: DocxPart[]): Uint8Array {
  return zipStored(docxEntries(parts));
}

/** The parts of the document buildDocx packs, in order, for tests that pack them another way. */
export function docxEntries(parts: DocxPart[]): { name: string; data: string }[] {
  const R = 'http://schemas.openxmlformats.org/officeDocument/2006/relationships';
  return [
    {
      name: '[Content_Types].xml',
      data: `<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">
<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>
<Default Extension="xml" ContentType="application/xml"/>
<Override PartName="/word/document.xml" ContentType="application/vnd.openxmlformats-officedocument.wordprocessingml.document.main+xml"/>
<Override PartName="/word/styles.xml" ContentType="application/vnd.openxmlformats-officedocument.wordprocessingml.styles+xml"/>
<Override PartName="/word/numbering.xml" ContentType="application/vnd.openxmlformats-officedocument.wordprocessingml.numbering+xml"/>
</Types>`,
    },
    {
      name: '_rels/.rels',
      data: `<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">
<Relationship Id="rId1" Type="${R}/officeDocument" Target="word/document.xml"/>
</Relationships>`,
    },
    {
      name: 'word/_rels/document.xml.rels',
      data: `<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">
<Relationship Id="rId1" Type="${R}/styles" Target="styles.xml"/>
<Relationship Id="rId2" Type="${R}/numbering" Target="numbering.xml"/>
</Relationships>`,
    },
    {
      name: 'word/document.xml',
      data: `<?xml version="1.0" encoding="UTF-8" standalone="yes"?>
<w:document xmlns:w="${W}"><w:body>${bodyXml(parts)}</w:body></w:document>`,
    },
    { name: 'word/styles.xml', data: STYLES },
    { name: 'word/numbering.xml', data: NUMBERING },
  ];
}
