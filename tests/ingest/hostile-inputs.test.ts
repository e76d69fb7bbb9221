// Hostile inputs end as failed documents whose reason names the limit they passed, found in bounded memory
// and time: a ZIP bomb posing as text (honest and lying headers), a package of too many entries, a 50 MB line
// of text, HTML and Word XML nested far too deep, a document of too many chunks, a parse past its deadline.
// The ZIP packages are written by the service's own writer (src/ingest/zip.ts; PKWARE APPNOTE.TXT 4.3), here
// with headers that may lie, and Node's zlib makes the raw DEFLATE streams (RFC 1951).
import { once } from 'node:events';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { createDeflateRaw, deflateRawSync } from 'node:zlib';
import { afterEach, describe, expect, it } from 'vitest';
import { startDeadline } from '../../src/ingest/budget.js';
import { chunkDocument } from '../../src/ingest/chunk.js';
import { loadDocument } from '../../src/ingest/load.js';
import { buildNormalisedDocument } from '../../src/ingest/normalise.js';
import { createDocumentApi } from '../../src/runtime.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { withDeadline } from '../fixtures/wait.js';
import { crc32, writeZip, type PackedZipEntry } from '../../src/ingest/zip.js';
import { docxEntries } from './docx-fixture.js';

const cleanups: (() => void | Promise<void>)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

function deflated(name: string, data: string | Uint8Array): PackedZipEntry {
  const bytes = typeof data === 'string' ? new TextEncoder().encode(data) : data;
  return { name: Buffer.from(name), packed: deflateRawSync(bytes), method: 8, size: bytes.length, crc: crc32(bytes) };
}

const W = 'http://schemas.openxmlformats.org/wordprocessingml/2006/main';
const MiB = 1024 * 1024;

/**
 * A Word document whose main part is `mib` MiB of one paragraph, deflated as a stream so the test never holds
 * the inflated text: a ZIP bomb of a few hundred KB.
 */
async function bombDocx(mib: number, opts: { declaredSize?: number; entry?: string } = {}): Promise<Buffer> {
  const head = `<?xml version="1.0" encoding="UTF-8"?><w:document xmlns:w="${W}"><w:body><w:p><w:r><w:t>`;
  const tail = '</w:t></w:r></w:p></w:body></w:document>';
  const unit = Buffer.alloc(MiB, 'A');
  const d = createDeflateRaw({ level: 9 });
  const out: Buffer[] = [];
  d.on('data', (c: Buffer) => out.push(c));
  const write = async (b: Buffer): Promise<void> => {
    if (!d.write(b)) await once(d, 'drain');
  };
  await write(Buffer.from(head));
  for (let i = 0; i < mib; i++) await write(unit);
  await write(Buffer.from(tail));
  d.end();
  await once(d, 'end');
  const size = head.length + mib * MiB + tail.length;
  const bombName = opts.entry ?? 'word/document.xml';
  const others = docxEntries([]).filter((e) => e.name !== bombName).map((e) => deflated(e.name, e.data));
  const document: PackedZipEntry = { name: Buffer.from(bombName), packed: Buffer.concat(out), method: 8, size: opts.declaredSize ?? size, crc: 0 };
  return writeZip([...others, document]);
}

/** Ingests one file of the given name and bytes into a fresh store; returns the summary and the runtime. */
async function ingestOne(name: string, bytes: Uint8Array | string, limits: Record<string, unknown> = {}) {
  const { rt, cleanup } = await tempRuntime({ limits });
  cleanups.push(cleanup);
  const folder = mkdtempSync(path.join(tmpdir(), 'sb-hostile-'));
  cleanups.push(() => rmSync(folder, { recursive: true, force: true }));
  writeFileSync(path.join(folder, name), bytes);
  const summary = await rt.ingestor.ingestPath(folder, { collection: 'c' });
  return { summary, rt };
}

describe('a ZIP bomb', () => {
  it('posing as a .txt upload, inflating to 100 MiB, fails on the sizes its directory declares, before inflating', async () => {
    const bomb = await bombDocx(100);
    expect(bomb.length).toBeLessThan(MiB); // a bomb indeed: under 1 MiB that would inflate to 100
    const { rt, cleanup } = await tempRuntime();
    cleanups.push(cleanup);
    const { queue, documents } = createDocumentApi(rt, 'inline');
    cleanups.push(() => queue.close());
    const out = await documents.upload('c', 'meeting-notes.txt', bomb);
    if (out.status !== 'queued') throw new Error('the upload should be queued');
    await withDeadline(queue.idle(), { what: 'the upload job to finish' });
    const job = rt.jobs.get(out.job.id)!;
    expect(job.state).toBe('failed');
    expect(job.error).toBe(
      'meeting-notes.txt: the package declares more than 67,108,864 bytes once inflated (limits.zipMaxInflatedBytes)',
    );
    expect(rt.repo.listDocuments('c')).toEqual([]);
  });

  it('whose headers lie about its size fails while inflating, at the limit', async () => {
    // In a part that is not XML (an image's place), so no text is counted and only the package limit stops it.
    const { summary } = await ingestOne('minutes.txt', await bombDocx(100, { declaredSize: 1000, entry: 'word/media/image1.png' }));
    expect(summary.failures).toEqual([
      {
        source: 'minutes.txt',
        reason: 'the package inflates to more than 67,108,864 bytes (limits.zipMaxInflatedBytes), more than its headers declare',
      },
    ]);
    expect(summary.documents.added).toBe(0);
  });

  it('whose main part lies about its size and is all text fails on limits.documentMaxChars while inflating', async () => {
    const { summary } = await ingestOne('minutes.txt', await bombDocx(100, { declaredSize: 1000 }));
    expect(summary.failures).toEqual([
      {
        source: 'minutes.txt',
        reason: 'the Word file has more than 5,000,000 characters of text (limits.documentMaxChars); stopped while unpacking it',
      },
    ]);
  });

  it('of more entries than limits.zipMaxEntries fails before any entry is read', async () => {
    const entries = docxEntries([{ paragraph: 'Buses run every ten minutes.' }]).map((e) => deflated(e.name, e.data));
    for (let i = 0; i < 40; i++) entries.push(deflated(`word/media/filler${i}.bin`, ''));
    const { summary } = await ingestOne('timetable.docx', writeZip(entries), { zipMaxEntries: 32 });
    expect(summary.failures).toEqual([
      { source: 'timetable.docx', reason: 'the package declares 46 entries, over the limit of 32 (limits.zipMaxEntries)' },
    ]);
  });

  it('holding more text than limits.documentMaxChars fails on the text of its parts while they are inflated, before it is converted', async () => {
    // 6 MiB of paragraphs inflates within the package limit; its text alone is over the character limit.
    const para = `<w:p><w:r><w:t>${'Tram stop '.repeat(100)}</w:t></w:r></w:p>\n`;
    const body = para.repeat(Math.ceil((6 * MiB) / para.length));
    const entries = docxEntries([]).map((e) =>
      e.name === 'word/document.xml' ? deflated(e.name, `<?xml version="1.0"?><w:document xmlns:w="${W}"><w:body>${body}</w:body></w:document>`) : deflated(e.name, e.data),
    );
    const { summary } = await ingestOne('stops.docx', writeZip(entries));
    expect(summary.failures).toHaveLength(1);
    expect(summary.failures[0]!.reason).toBe(
      'the Word file has more than 5,000,000 characters of text (limits.documentMaxChars); stopped while unpacking it',
    );
  });

  it('leaves an honest deflated Word file readable, through the same bounded reader', async () => {
    const entries = docxEntries([{ heading: 1, text: 'Lost property' }, { paragraph: 'Items found on trams are kept at Marrowgate depot for 30 days.' }]);
    const loaded = await loadDocument(writeZip(entries.map((e) => deflated(e.name, e.data))), 'lost-property.docx');
    expect(loaded.title).toBe('Lost property');
    expect(loaded.blocks.map((b) => b.text)).toEqual(['Lost property', 'Items found on trams are kept at Marrowgate depot for 30 days.']);
  });
});

describe('text and markup past the limits', () => {
  it('a 50 MB single line of text fails on limits.documentMaxChars before it is split', async () => {
    const line = 'fare '.repeat(10_000_000); // 50,000,000 characters, no line break
    const { summary } = await ingestOne('one-line.txt', line);
    expect(summary.failures).toEqual([
      // Refused on its byte count, before it is decoded: at most 3 bytes make a character.
      { source: 'one-line.txt', reason: 'the document has at least 16,666,665 characters of text, over the limit of 5,000,000 (limits.documentMaxChars)' },
    ]);
  });

  it('a text file within three bytes a character of the limit is decoded and counted exactly', async () => {
    const { summary } = await ingestOne('fares.txt', 'fare '.repeat(240), { documentMaxChars: 1000 });
    expect(summary.failures).toEqual([{ source: 'fares.txt', reason: 'the document has 1,200 characters of text, over the limit of 1,000 (limits.documentMaxChars)' }]);
    // Three-byte characters: 1,200 bytes are 400 characters, within the limit, and read.
    const wide = await ingestOne('wide.txt', '運'.repeat(400), { documentMaxChars: 1000 });
    expect(wide.summary.failures).toEqual([]);
  });

  it('HTML nested 200,000 elements deep fails on limits.htmlMaxDepth while it is parsed', async () => {
    const html = `<!doctype html><html><body>${'<div>'.repeat(200_000)}deep${'</div>'.repeat(200_000)}</body></html>`;
    const { summary } = await ingestOne('deep.html', html);
    expect(summary.failures).toEqual([{ source: 'deep.html', reason: 'the HTML nests elements more than 512 deep (limits.htmlMaxDepth)' }]);
  });

  it('a Word file whose XML nests 100,000 deep fails on limits.htmlMaxDepth before it is converted', async () => {
    const body = `${'<w:sdt><w:sdtContent>'.repeat(50_000)}<w:p/>${'</w:sdtContent></w:sdt>'.repeat(50_000)}`;
    const entries = docxEntries([]).map((e) =>
      e.name === 'word/document.xml' ? deflated(e.name, `<?xml version="1.0"?><w:document xmlns:w="${W}"><w:body>${body}</w:body></w:document>`) : deflated(e.name, e.data),
    );
    const { summary } = await ingestOne('nested.docx', writeZip(entries));
    expect(summary.failures).toEqual([{ source: 'nested.docx', reason: 'the Word file nests elements more than 512 deep (limits.htmlMaxDepth)' }]);
  });

  it('a document that needs more chunks than limits.documentMaxChunks fails, and nothing of it is stored', async () => {
    const text = Array.from({ length: 60 }, (_, i) => `SECTION ${i + 1}\n\nRoute ${i + 1} runs from the depot to the harbour every ${i + 5} minutes.`).join('\n\n');
    const { summary, rt } = await ingestOne('routes.txt', text, { documentMaxChunks: 5 });
    expect(summary.failures).toHaveLength(1);
    expect(summary.failures[0]!.reason).toMatch(/^the document needs more than 5 chunks \(limits\.documentMaxChunks\); stopped at character \d[\d,]* of \d[\d,]*$/);
    expect(rt.repo.listDocuments('c')).toEqual([]);
  });

  it('a word list of more distinct words than limits.documentMaxDistinctWords fails before it is split, and a document within it is read', async () => {
    const list = Array.from({ length: 3000 }, (_, i) => `code${i}`).join(' ');
    const { summary, rt } = await ingestOne('codes.txt', list, { documentMaxDistinctWords: 2000 });
    expect(summary.failures).toHaveLength(1);
    expect(summary.failures[0]!.reason).toMatch(/^the document has more than 2,000 distinct words \(limits\.documentMaxDistinctWords\); stopped at character [\d,]+ of [\d,]+$/);
    expect(rt.repo.listDocuments('c')).toEqual([]);
    // The same length of text in few words is read: the limit is on the vocabulary, not the size.
    const prose = Array.from({ length: 3000 }, (_, i) => `code${i % 50}`).join(' ');
    const again = await ingestOne('codes.txt', prose, { documentMaxDistinctWords: 2000 });
    expect(again.summary.failures).toEqual([]);
    expect(again.rt.repo.listDocuments('c')).toHaveLength(1);
  });
});

describe('the parse deadline', () => {
  // A clock that moves one second each time it is read: the budget runs out after a known number of steps,
  // whatever the machine's speed.
  const tickingClock = (): (() => number) => {
    let t = 0;
    return () => (t += 1000);
  };

  it('stops splitting a document into chunks once limits.parseMaxSeconds has passed', () => {
    const doc = buildNormalisedDocument(Array.from({ length: 50 }, (_, i) => ({ kind: 'paragraph' as const, text: `Stop ${i} is served by night buses.` })));
    const count = (s: string): number => s.split(/\s+/).length;
    const deadline = startDeadline(10, tickingClock());
    expect(() => chunkDocument(doc, { targetTokens: 8, maxTokens: 16, overlapTokens: 0, countTokens: count, deadline })).toThrow(
      'reading the document took longer than 10 s (limits.parseMaxSeconds); stopped while splitting the text into chunks',
    );
    // Without a deadline the same document is chunked in full.
    expect(chunkDocument(doc, { targetTokens: 8, maxTokens: 16, overlapTokens: 0, countTokens: count }).length).toBeGreaterThan(10);
  });

  it('stops reading the lines of a text file once the budget is spent', async () => {
    const text = Array.from({ length: 20_000 }, (_, i) => `Line ${i} of the timetable.`).join('\n');
    await expect(loadDocument(new TextEncoder().encode(text), 'timetable.txt', { deadline: startDeadline(1.5, tickingClock()) })).rejects.toThrow(
      'reading the document took longer than 1.5 s (limits.parseMaxSeconds); stopped while reading lines of text',
    );
  });
});
