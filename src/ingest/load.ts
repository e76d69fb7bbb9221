import { sbError } from '../errors.js';
import type { LoadedDocument } from '../types.js';
import { detectFormat } from './detect.js';
import { loadDocx } from './load-docx.js';
import { loadHtml } from './load-html.js';
import { loadMarkdown } from './load-markdown.js';
import { DEFAULT_PDF_LIMITS, loadPdf, type PdfLimits } from './load-pdf.js';
import { loadText } from './load-text.js';

/**
 * Reads one file into blocks. Unsupported content throws SB_ERR_INGEST_UNSUPPORTED_TYPE; a file
 * of a supported format that cannot be read (corrupt or encrypted PDF, PDF without text) throws
 * a plain Error whose message says why, for the caller to report against the file.
 */
export async function loadDocument(
  bytes: Uint8Array,
  fileName: string,
  opts: { pdf?: PdfLimits } = {},
): Promise<LoadedDocument> {
  const format = detectFormat(bytes, fileName);
  switch (format) {
    case 'pdf':
      return loadPdf(bytes, fileName, opts.pdf ?? DEFAULT_PDF_LIMITS);
    case 'markdown':
      return loadMarkdown(bytes, fileName);
    case 'html':
      return loadHtml(bytes, fileName);
    case 'text':
      return loadText(bytes, fileName);
    case 'docx':
      return loadDocx(bytes, fileName);
    case null:
      throw sbError('SB_ERR_INGEST_UNSUPPORTED_TYPE', fileName);
  }
}
