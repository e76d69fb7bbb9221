import type { LoadedDocument } from '../types.js';
import { parseHtml } from './load-html.js';
import { unpagedDocument } from './load-text.js';

// Password-protected Word files are not ZIP packages but OLE compound files (the encrypted
// package sits inside one, MS-OFFCRYPTO 2.3.4), and so is the older binary .doc format.
const OLE_MAGIC = [0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1];

export const DOCX_OLE_MESSAGE =
  'encrypted (password protected) Word file or old binary .doc format: neither is supported; save it as an unprotected .docx';

function isOle(bytes: Uint8Array): boolean {
  return OLE_MAGIC.every((b, i) => bytes[i] === b);
}

/**
 * Reads a Word (.docx) file through mammoth, which maps paragraph styles to HTML headings and
 * numbering to lists and keeps tables; the HTML then goes through the same block builder as
 * web pages, so both formats produce the same block shapes.
 */
export async function loadDocx(bytes: Uint8Array, fileName: string): Promise<LoadedDocument> {
  if (isOle(bytes)) throw new Error(DOCX_OLE_MESSAGE);
  const { default: mammoth } = await import('mammoth');
  let html: string;
  try {
    const result = await mammoth.convertToHtml(
      { buffer: Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength) },
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
    throw new Error(`not a readable DOCX (corrupt file or not a Word document): ${detail}`, { cause: err });
  }
  const { blocks } = parseHtml(`<!doctype html><html><body>${html}</body></html>`);
  const text = blocks.map((b) => b.text).join('\n');
  const h1 = blocks.find((b) => b.kind === 'heading' && b.level === 1);
  // The blocks come from the converter's HTML; the document keeps its own format.
  return unpagedDocument('docx', fileName, blocks, h1?.text, { source_format: 'docx' }, text);
}
