import type { LoadedDocument } from '../types.js';
import { checkChars, DEFAULT_DOCUMENT_LIMITS, LimitExceeded, NO_DEADLINE, type Deadline, type DocumentLimits } from './budget.js';
import { parseHtml } from './load-html.js';
import { unpagedDocument } from './load-text.js';
import { readZipBounded, writeStoredZip, ZipFormatError, type ZipEntry } from './zip.js';

// Password-protected Word files are not ZIP packages but OLE compound files (the encrypted
// package sits inside one, MS-OFFCRYPTO 2.3.4), and so is the older binary .doc format.
const OLE_MAGIC = [0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1];

export const DOCX_OLE_MESSAGE =
  'encrypted (password protected) Word file or old binary .doc format: neither is supported; save it as an unprotected .docx';

const UNREADABLE = 'not a readable DOCX (corrupt file or not a Word document)';

function isOle(bytes: Uint8Array): boolean {
  return OLE_MAGIC.every((b, i) => bytes[i] === b);
}

const LT = 0x3c;
const GT = 0x3e;
const SLASH = 0x2f;

const AMP = 0x26;
const SEMI = 0x3b;

/** Characters of the text between `from` and `to` (UTF-8 lead bytes; an entity or character reference is one). */
function textChars(xml: Uint8Array, from: number, to: number): number {
  let n = 0;
  let blank = true;
  for (let k = from; k < to; k++) {
    const c = xml[k]!;
    if (c === AMP) {
      const semi = xml.indexOf(SEMI, k);
      if (semi !== -1 && semi < to && semi - k <= 12) k = semi;
    } else if ((c & 0xc0) === 0x80) continue;
    if (c !== 0x20 && c !== 0x09 && c !== 0x0a && c !== 0x0d) blank = false;
    n++;
  }
  // Whitespace between tags is layout, not text.
  return blank ? 0 : n;
}

/**
 * One pass over an XML part's bytes: refuses elements nested deeper than `maxDepth` (the converter's tree walks
 * recurse, so a part nested thousands deep would end in a stack overflow after long work) and returns the
 * characters of its text. The depth is the count of start tags not yet closed; comments, declarations and
 * processing instructions are skipped, and a quoted attribute value may hold '>' (XML 1.0, section 3.1).
 */
function scanXml(xml: Uint8Array, maxDepth: number): number {
  let depth = 0;
  let chars = 0;
  let textFrom = 0;
  for (let i = xml.indexOf(LT); i !== -1 && i < xml.length; i = xml.indexOf(LT, i)) {
    chars += textChars(xml, textFrom, i);
    const next = xml[i + 1];
    if (next === SLASH) {
      depth = Math.max(0, depth - 1);
      const close = xml.indexOf(GT, i);
      i = close === -1 ? xml.length : close + 1;
      textFrom = i;
      continue;
    }
    let j = i + 1;
    let quote = 0;
    for (; j < xml.length; j++) {
      const c = xml[j]!;
      if (quote) {
        if (c === quote) quote = 0;
      } else if (c === 0x22 || c === 0x27) quote = c;
      else if (c === GT) break;
    }
    // "<!" (comments, CDATA, doctype) and "<?" open nothing.
    if (next !== 0x21 && next !== 0x3f && xml[j - 1] !== SLASH && ++depth > maxDepth) {
      throw new LimitExceeded('htmlMaxDepth', `the Word file nests elements more than ${maxDepth} deep (limits.htmlMaxDepth)`);
    }
    i = j + 1;
    textFrom = i;
  }
  return chars;
}

const decoder = new TextDecoder();
const isXmlPart = (e: ZipEntry): boolean => /\.(xml|rels)$/i.test(decoder.decode(e.name));

/**
 * Reads a Word (.docx) file through mammoth, which maps paragraph styles to HTML headings and
 * numbering to lists and keeps tables; the HTML then goes through the same block builder as
 * web pages, so both formats produce the same block shapes. The package is unpacked first within
 * the ZIP limits (src/ingest/zip.ts), and mammoth reads the measured parts, stored.
 */
export async function loadDocx(
  bytes: Uint8Array,
  fileName: string,
  limits: DocumentLimits = DEFAULT_DOCUMENT_LIMITS,
  deadline: Deadline = NO_DEADLINE,
): Promise<LoadedDocument> {
  if (isOle(bytes)) throw new Error(DOCX_OLE_MESSAGE);
  let entries: ZipEntry[];
  try {
    entries = readZipBounded(bytes, limits);
  } catch (err) {
    if (err instanceof ZipFormatError) throw new Error(`${UNREADABLE}: ${err.message}`, { cause: err });
    throw err;
  }
  // The text of the XML parts is what conversion extracts (plus a little metadata), whichever part the
  // package names as its main one: over the limit, the file is refused before it is converted.
  let chars = 0;
  for (const e of entries) if (isXmlPart(e)) chars += scanXml(e.data, limits.htmlMaxDepth);
  checkChars(chars, limits, 'the Word file has');
  deadline.check('unpacking the Word file');
  const { default: mammoth } = await import('mammoth');
  let html: string;
  try {
    const result = await mammoth.convertToHtml(
      { buffer: writeStoredZip(entries) },
      {
        ignoreEmptyParagraphs: true,
        // Linked files outside the package are never read: a document must not reach the disk.
        externalFileAccess: false,
        // Images carry no text to cite; an empty source keeps base64 blobs out of memory.
        convertImage: mammoth.images.imgElement(async () => ({ src: '' })),
      },
    );
    html = result.value;
  } catch (err) {
    const detail = err instanceof Error ? err.message : String(err);
    throw new Error(`${UNREADABLE}: ${detail}`, { cause: err });
  }
  deadline.check('converting the Word file');
  const { blocks } = parseHtml(`<!doctype html><html><body>${html}</body></html>`, limits);
  const text = blocks.map((b) => b.text).join('\n');
  checkChars(text.length, limits);
  const h1 = blocks.find((b) => b.kind === 'heading' && b.level === 1);
  // The blocks come from the converter's HTML; the document keeps its own format.
  return unpagedDocument('docx', fileName, blocks, h1?.text, { source_format: 'docx' }, text);
}
