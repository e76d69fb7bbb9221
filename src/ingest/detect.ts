import type { DocumentFormat } from '../types.js';
import { decodeText } from './load-text.js';

const SNIFF_BYTES = 1024;
// Share of C0 control bytes (other than tab, line feed, form feed, carriage return) above
// which a file is treated as binary; real text files have essentially none.
const MAX_CONTROL_SHARE = 0.1;

/** Formats the loaders read: the stored formats plus DOCX, which is converted to HTML blocks. */
export type SourceFormat = DocumentFormat | 'docx';

const EXTENSIONS: Record<string, SourceFormat> = {
  md: 'markdown',
  markdown: 'markdown',
  html: 'html',
  htm: 'html',
  txt: 'text',
  text: 'text',
  // A .pdf without the magic bytes still goes to the PDF loader, whose error says what is wrong.
  pdf: 'pdf',
  docx: 'docx',
};

function startsWith(head: Uint8Array, magic: number[]): boolean {
  return magic.every((b, i) => head[i] === b);
}

const ZIP_MAGIC = [0x50, 0x4b, 0x03, 0x04]; // "PK\3\4", a ZIP local file header (APPNOTE.TXT 4.3.7)
const OLE_MAGIC = [0xd0, 0xcf, 0x11, 0xe0, 0xa1, 0xb1, 0x1a, 0xe1];
const WORD_PART = new TextEncoder().encode('word/document.xml');

function containsBytes(haystack: Uint8Array, needle: Uint8Array): boolean {
  outer: for (let i = 0; i + needle.length <= haystack.length; i++) {
    for (let j = 0; j < needle.length; j++) if (haystack[i + j] !== needle[j]) continue outer;
    return true;
  }
  return false;
}

function hasPdfMagic(head: Uint8Array): boolean {
  // Readers accept the header anywhere in the first 1024 bytes (ISO 32000-1, annex H).
  const magic = [0x25, 0x50, 0x44, 0x46, 0x2d]; // "%PDF-"
  outer: for (let i = 0; i + magic.length <= head.length; i++) {
    for (let j = 0; j < magic.length; j++) if (head[i + j] !== magic[j]) continue outer;
    return true;
  }
  return false;
}

function hasUtf16Bom(b: Uint8Array): boolean {
  return (b[0] === 0xff && b[1] === 0xfe) || (b[0] === 0xfe && b[1] === 0xff);
}

function looksBinary(head: Uint8Array): boolean {
  if (head.length === 0) return false;
  let control = 0;
  for (const byte of head) {
    if (byte === 0) return true;
    if ((byte < 0x20 && byte !== 0x09 && byte !== 0x0a && byte !== 0x0c && byte !== 0x0d) || byte === 0x7f) control++;
  }
  return control / head.length > MAX_CONTROL_SHARE;
}

function looksLikeHtml(text: string): boolean {
  const lead = text
    .replace(/^\uFEFF/, '')
    .replace(/^(?:\s|<\?xml[^>]*\?>|<!--[\s\S]*?-->)*/i, '')
    .slice(0, 32)
    .toLowerCase();
  return lead.startsWith('<!doctype html') || /^<html[\s>]/.test(lead);
}

/** The format of a file, judged from its content first and its extension second; null when unsupported. */
export function detectFormat(bytes: Uint8Array, fileName: string): SourceFormat | null {
  const head = bytes.subarray(0, SNIFF_BYTES);
  const ext = /\.([^./\\]+)$/.exec(fileName)?.[1]?.toLowerCase();
  if (hasPdfMagic(head)) return 'pdf';
  // A Word package is a ZIP whose part names are stored in plain bytes; other ZIPs are not documents.
  if (startsWith(head, ZIP_MAGIC)) return ext === 'docx' || containsBytes(bytes, WORD_PART) ? 'docx' : null;
  // An encrypted .docx is an OLE file: the DOCX loader says why it cannot be read.
  if (startsWith(head, OLE_MAGIC)) return ext === 'docx' ? 'docx' : null;
  // UTF-16 text is full of NUL bytes, so it is judged after decoding.
  const text = hasUtf16Bom(head) ? decodeText(bytes.subarray(0, SNIFF_BYTES * 2)) : null;
  if (text === null && looksBinary(head)) return null;
  if (looksLikeHtml(text ?? decodeText(head))) return 'html';
  return ext === undefined ? null : (EXTENSIONS[ext] ?? null);
}
