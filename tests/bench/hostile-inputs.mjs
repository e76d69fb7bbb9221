// The hostile inputs of the hostile-input benchmarks (hostile.mjs: one fresh process each; hostile-http.mjs:
// through the upload API of one server), generated on demand: ZIP bombs posing as .txt (honest and lying
// headers; PKWARE APPNOTE.TXT 4.3, DEFLATE by Node's zlib), a Word file of 60 MiB of text, a 50 MB line, a
// 4.95 MB line (just under the character limit), and HTML nested 200,000 deep. Needs dist/ (npm run build).
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { deflateRawSync } from 'node:zlib';

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');
const { crc32, writeZip } = await import(path.join(root, 'dist', 'ingest', 'zip.js'));
const MiB = 1024 * 1024;
const W = 'http://schemas.openxmlformats.org/wordprocessingml/2006/main';

/** A ZIP of deflated entries, by the service's own writer; `declare` overrides an entry's stated inflated size (a lying header). */
function zip(entries) {
  return writeZip(
    entries.map((e) => ({ name: Buffer.from(e.name), packed: deflateRawSync(e.data, { level: 9 }), method: 8, size: e.declare ?? e.data.length, crc: crc32(e.data) })),
  );
}

function wordFile(body, declare) {
  const document = Buffer.from(`<?xml version="1.0"?><w:document xmlns:w="${W}"><w:body>${body}</w:body></w:document>`);
  return zip([
    { name: '[Content_Types].xml', data: Buffer.from('<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types"/>') },
    { name: 'word/document.xml', data: document, declare },
  ]);
}

/**
 * Text of about `chars` characters in sentences of 12 words drawn from `vocabulary` made-up words with Zipf's
 * law (rank r has weight 1/r), from a seeded generator: the shape of real prose, without a real text.
 */
function prose(chars, vocabulary) {
  const words = Array.from({ length: vocabulary }, (_, i) => `w${i.toString(36)}`);
  const cumulative = [];
  let total = 0;
  for (let r = 1; r <= vocabulary; r++) cumulative.push((total += 1 / r));
  let seed = 12345;
  const next = () => ((seed = (seed * 1103515245 + 12345) % 2 ** 31) / 2 ** 31) * total;
  const pick = () => {
    const x = next();
    let lo = 0;
    let hi = cumulative.length - 1;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (cumulative[mid] < x) lo = mid + 1;
      else hi = mid;
    }
    return words[lo];
  };
  const parts = [];
  let length = 0;
  for (let s = 0; length < chars; s++) {
    const sentence = `${Array.from({ length: 12 }, pick).join(' ')}.${s % 8 === 7 ? '\n\n' : ' '}`;
    parts.push(sentence);
    length += sentence.length;
  }
  return parts.join('');
}

/** label → [file name, () => the file's bytes or text] */
export const INPUTS = {
  'ZIP bomb as .txt, 100 MiB, honest headers': ['meeting.txt', () => wordFile(`<w:p><w:r><w:t>${'A'.repeat(100 * MiB)}</w:t></w:r></w:p>`)],
  'ZIP bomb as .txt, 400 MiB, headers declare 1 KB': ['minutes.txt', () => wordFile(`<w:p><w:r><w:t>${'A'.repeat(400 * MiB)}</w:t></w:r></w:p>`, 1000)],
  'Word file, 60 MiB of paragraphs': ['stops.docx', () => wordFile(`<w:p><w:r><w:t>${'Tram stop '.repeat(100)}</w:t></w:r></w:p>`.repeat(Math.ceil((60 * MiB) / 1037)))],
  '50 MB single line': ['one-line.txt', () => 'fare '.repeat(10_000_000)],
  '4.9 MB single line of 620,000 distinct words': ['long-line.txt', () => Array.from({ length: 620_000 }, (_, i) => `s${i}`).join(' ')],
  '3 MB of prose, 20,000-word vocabulary (under the limits)': ['long-prose.txt', () => prose(3_000_000, 20_000)],
  'corrupt PDF (a header, no cross-reference table)': ['broken.pdf', () => '%PDF-1.7\n1 0 obj << /Type /Catalog >>\ngarbage without xref\n'],
  'HTML nested 200,000 deep': ['deep.html', () => `<!doctype html><html><body>${'<div>'.repeat(200_000)}x${'</div>'.repeat(200_000)}</body></html>`],
};

