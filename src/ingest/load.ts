import { sbError } from '../errors.js';
import type { LoadedDocument } from '../types.js';
import { checkChars, DEFAULT_DOCUMENT_LIMITS, NO_DEADLINE, type Deadline, type DocumentLimits } from './budget.js';
import { detectFormat } from './detect.js';
import { loadDocx } from './load-docx.js';
import { loadHtml } from './load-html.js';
import { loadMarkdown } from './load-markdown.js';
import { DEFAULT_PDF_LIMITS, loadPdf, type PdfLimits } from './load-pdf.js';
import { loadText } from './load-text.js';

/**
 * Reads one file into blocks. Unsupported content throws SB_ERR_INGEST_UNSUPPORTED_TYPE; a file
 * of a supported format that cannot be read (corrupt or encrypted PDF, PDF without text) throws
 * a plain Error whose message says why, for the caller to report against the file; one over a
 * limit throws LimitExceeded (src/ingest/budget.ts), whose message names the limit.
 */
export async function loadDocument(
  bytes: Uint8Array,
  fileName: string,
  opts: { pdf?: PdfLimits; limits?: DocumentLimits; deadline?: Deadline } = {},
): Promise<LoadedDocument> {
  const limits = opts.limits ?? DEFAULT_DOCUMENT_LIMITS;
  const deadline = opts.deadline ?? NO_DEADLINE;
  const format = detectFormat(bytes, fileName);
  let loaded: LoadedDocument;
  switch (format) {
    case 'pdf':
      loaded = await loadPdf(bytes, fileName, opts.pdf ?? DEFAULT_PDF_LIMITS);
      break;
    case 'markdown':
      loaded = loadMarkdown(bytes, fileName, limits);
      break;
    case 'html':
      loaded = loadHtml(bytes, fileName, limits);
      break;
    case 'text':
      loaded = loadText(bytes, fileName, limits, deadline);
      break;
    case 'docx':
      loaded = await loadDocx(bytes, fileName, limits, deadline);
      break;
    case null:
      throw sbError('SB_ERR_INGEST_UNSUPPORTED_TYPE', fileName);
  }
  // Every format, PDFs included, answers to the same bound on extracted text before it is chunked.
  checkChars(loaded.blocks.reduce((n, b) => n + b.text.length, 0), limits);
  deadline.check('reading the file');
  return loaded;
}
