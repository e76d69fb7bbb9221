import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { refusedBySize } from '../../src/ingest/size-check.js';

const dir = mkdtempSync(path.join(tmpdir(), 'sb-size-'));
afterAll(() => rmSync(dir, { recursive: true, force: true }));
const write = (name: string, body: string | Buffer): { file: string; size: number } => {
  const file = path.join(dir, name);
  writeFileSync(file, body);
  return { file, size: Buffer.byteLength(body) };
};

describe('refusing text by its size before reading it', () => {
  const limits = { maxChars: 100 };

  it('refuses text and Markdown holding more characters than the limit by their byte count alone (at most 3 bytes a character)', async () => {
    const t = write('long.txt', 'a'.repeat(400));
    expect(await refusedBySize(t.file, t.size, limits)).toBe('the document has at least 132 characters of text, over the limit of 100 (limits.documentMaxChars)');
    const m = write('long.md', '# Title\n' + 'b'.repeat(400));
    expect(await refusedBySize(m.file, m.size, limits)).toMatch(/limits\.documentMaxChars/);
  });

  it('leaves a file that could still fit, and formats whose text is not bounded by their size, to the loaders', async () => {
    const fits = write('fits.txt', 'a'.repeat(303)); // (303 - 3) / 3 = 100 characters at least: within the limit
    expect(await refusedBySize(fits.file, fits.size, limits)).toBeNull();
    const html = write('page.html', '<html><body>' + '<p>x</p>'.repeat(100) + '</body></html>');
    expect(await refusedBySize(html.file, html.size, limits)).toBeNull();
    const pdf = write('misnamed.txt', Buffer.concat([Buffer.from('%PDF-1.7\n'), Buffer.alloc(400, 0x20)]));
    expect(await refusedBySize(pdf.file, pdf.size, limits)).toBeNull();
  });
});
