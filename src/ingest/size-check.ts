// A text or Markdown file holds at least one character for every 3 bytes (load-text.ts), so one too long for
// `limits.documentMaxChars` is known from its size: it is refused from the file's first bytes and its size,
// before the whole file is read into memory (a 50 MB line would otherwise cost 50 MB, and more to hash it).
import { open } from 'node:fs/promises';
import path from 'node:path';
import { checkChars, LimitExceeded, type DocumentLimits } from './budget.js';
import { detectFormat } from './detect.js';

// Enough of the file's start for the format sniffing (detect.ts reads at most this much of it).
const HEAD_BYTES = 64 * 1024;

/** The refusal's reason when the file is text or Markdown too long for the limit by its size alone; else null. */
export async function refusedBySize(file: string, size: number, limits: Pick<DocumentLimits, 'maxChars'>): Promise<string | null> {
  const atLeast = Math.floor(Math.max(0, size - 3) / 3);
  if (atLeast <= limits.maxChars) return null;
  const handle = await open(file, 'r');
  let head: Uint8Array;
  try {
    const buf = Buffer.alloc(Math.min(HEAD_BYTES, size));
    const { bytesRead } = await handle.read(buf, 0, buf.length, 0);
    head = buf.subarray(0, bytesRead);
  } finally {
    await handle.close();
  }
  const format = detectFormat(head, path.basename(file));
  if (format !== 'text' && format !== 'markdown') return null;
  try {
    checkChars(atLeast, limits, 'the document has at least');
  } catch (err) {
    if (err instanceof LimitExceeded) return err.message;
    throw err;
  }
  return null;
}
