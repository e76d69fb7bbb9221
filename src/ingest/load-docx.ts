import type { LoadedDocument } from '../types.js';
import { checkChars, DEFAULT_DOCUMENT_LIMITS, LimitExceeded, NO_DEADLINE, type Deadline, type DocumentLimits } from './budget.js';
import { parseHtml } from './load-html.js';
import { unpagedDocument } from './load-text.js';
import { XmlTextCounter } from './xml-scan.js';
import { readZipBounded, writeStoredZip, ZipFormatError, type EntryReader, type ZipEntry } from './zip.js';

// Password-protected Word files are not ZIP packages but OLE compound files (the encrypted
// package sits inside one, MS-OFFCRYPTO 2.3.4), and so is the older binary .doc format.
const OLE_MAGIC = [0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1];

export const DOCX_OLE_MESSAGE =
  'encrypted (password protected) Word file or old binary .doc format: neither is supported; save it as an unprotected .docx';

const UNREADABLE = 'not a readable DOCX (corrupt file or not a Word document)';

function isOle(bytes: Uint8Array): boolean {
  return OLE_MAGIC.every((b, i) => bytes[i] === b);
}

const decoder = new TextDecoder();
const isXmlPart = (name: Uint8Array): boolean => /\.(xml|rels)$/i.test(decoder.decode(name));
const fmt = (n: number): string => n.toLocaleString('en-US');

/**
 * Counts the text of the package's XML parts as they are inflated (xml-scan.ts), all parts together: once
 * past `limits.documentMaxChars`, or nested past `limits.htmlMaxDepth`, it stops the unpacking there.
 */
function textCounter(limits: DocumentLimits): (name: Uint8Array) => EntryReader | null {
  let before = 0;
  return (name) => {
    if (!isXmlPart(name)) return null;
    const counter = new XmlTextCounter(limits.htmlMaxDepth);
    return {
      piece(bytes) {
        counter.feed(bytes);
        if (before + counter.charsSoFar > limits.maxChars) {
          throw new LimitExceeded(
            'documentMaxChars',
            `the Word file has more than ${fmt(limits.maxChars)} characters of text (limits.documentMaxChars); stopped while unpacking it`,
          );
        }
      },
      end() {
        before += counter.finish();
      },
    };
  };
}

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
    // The text of the XML parts is what conversion extracts (plus a little metadata), whichever part the
    // package names as its main one: over the limit, the file is refused while it is unpacked.
    entries = await readZipBounded(bytes, limits, textCounter(limits));
  } catch (err) {
    if (err instanceof ZipFormatError) throw new Error(`${UNREADABLE}: ${err.message}`, { cause: err });
    throw err;
  }
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
