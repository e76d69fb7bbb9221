import { execFile } from 'node:child_process';
import { createHash } from 'node:crypto';
import { mkdtemp, readdir, readFile, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { extname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { promisify } from 'node:util';
import { PDFDocument } from 'pdf-lib';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const run = promisify(execFile);
const seedDir = fileURLToPath(new URL('../seed-docs/', import.meta.url));
const questionsFile = fileURLToPath(new URL('./fixtures/demo-questions.jsonl', import.meta.url));

// Page counts are pinned so that an edit which reflows the text onto another page is noticed;
// the question set points at page numbers inside these files.
const EXPECTED_PAGES: Record<string, number> = {
  'staff-handbook.pdf': 5,
  'tram-depot-safety-procedures.pdf': 4,
};
const INGESTED = new Set(['.md', '.html', '.txt', '.pdf']);

interface Turn {
  role: 'user' | 'assistant';
  content: string;
}
// The shared question format (docs/eval-answers.md), with the demo set's explicit histories.
interface DemoQuestion {
  id: string;
  kind: 'lookup' | 'paraphrase' | 'unanswerable' | 'follow-up' | 'injection';
  question: string;
  answerable: boolean;
  doc: string | null;
  page: number | null;
  must_contain: string[];
  must_not_contain?: string[];
  history?: Turn[];
  note?: string;
}

const sha256 = (bytes: Uint8Array): string => createHash('sha256').update(bytes).digest('hex');

/** Per-page text as pdf-parse v2 extracts it, the same reader the PDF loader uses. */
async function pdfPages(path: string): Promise<string[]> {
  const { PDFParse } = await import('pdf-parse');
  const parser = new PDFParse({ data: new Uint8Array(await readFile(path)) });
  try {
    const result = await parser.getText();
    return result.pages.map((p) => p.text);
  } finally {
    await parser.destroy();
  }
}

/** Visible text of an HTML page, roughly: enough to prove a fact is not split by markup. */
function htmlText(html: string): string {
  return html
    .replace(/<(script|style)\b[\s\S]*?<\/\1>/gi, ' ')
    .replace(/<[^>]+>/g, ' ')
    .replace(/&gt;/g, '>')
    .replace(/&lt;/g, '<')
    .replace(/&copy;/g, '\u00a9')
    .replace(/&amp;/g, '&');
}

describe('seed-docs PDF generator', () => {
  let outDir = '';

  beforeAll(async () => {
    outDir = await mkdtemp(join(tmpdir(), 'sourcebound-seed-'));
    // Killed inside the hook's own timeout, so a hung generator fails here, naming the command.
    await run(process.execPath, [join(seedDir, 'build-pdfs.mjs'), outDir], { timeout: 50_000, killSignal: 'SIGKILL' });
  });

  afterAll(async () => {
    if (outDir) await rm(outDir, { recursive: true, force: true });
  });

  it('rebuilds byte-identical copies of the committed PDFs', async () => {
    const built = (await readdir(outDir)).filter((f) => f.endsWith('.pdf')).sort();
    expect(built).toEqual(Object.keys(EXPECTED_PAGES).sort());
    for (const file of built) {
      const fresh = await readFile(join(outDir, file));
      const committed = await readFile(join(seedDir, file));
      expect(sha256(fresh), file).toBe(sha256(committed));
    }
  });

  it('gives each PDF its expected page count, read back with pdf-lib', async () => {
    // pdf-lib (a reference PDF library independent of the text extractor) counts the page tree.
    for (const [file, pages] of Object.entries(EXPECTED_PAGES)) {
      const doc = await PDFDocument.load(await readFile(join(seedDir, file)), { updateMetadata: false });
      expect(doc.getPageCount(), file).toBe(pages);
      expect(doc.getAuthor()).toBe('Marrowgate Valley Transit');
      expect(doc.getCreationDate()?.toISOString()).toBe('2026-01-12T09:00:00.000Z');
    }
  });

  it('puts a running header and a "Page N of M" footer with the document code on every page', async () => {
    for (const [file, pages] of Object.entries(EXPECTED_PAGES)) {
      const texts = await pdfPages(join(seedDir, file));
      expect(texts).toHaveLength(pages);
      texts.forEach((text, i) => {
        expect(text.startsWith('Marrowgate Valley Transit \u2014 '), `${file} page ${i + 1}`).toBe(true);
        expect(text).toMatch(new RegExp(`MVT-[A-Z]+-\\d{3} Issue \\d+ Page ${i + 1} of ${pages}\\s*$`));
      });
    }
  });

  it('hyphenates at least one word across a line end in each PDF', async () => {
    for (const file of Object.keys(EXPECTED_PAGES)) {
      const text = (await pdfPages(join(seedDir, file))).join('\n');
      expect(text, file).toMatch(/[a-z]-\n[a-z]/);
    }
  });
});

describe('demo question set', () => {
  let questions: DemoQuestion[] = [];
  const docText = new Map<string, string[]>();

  beforeAll(async () => {
    const raw = await readFile(questionsFile, 'utf8');
    questions = raw
      .split('\n')
      .filter((line) => line.trim() !== '')
      .map((line) => JSON.parse(line) as DemoQuestion);
    for (const file of await readdir(seedDir)) {
      const ext = extname(file);
      if (!INGESTED.has(ext)) continue;
      const path = join(seedDir, file);
      if (ext === '.pdf') docText.set(file, await pdfPages(path));
      else if (ext === '.html') docText.set(file, [htmlText(await readFile(path, 'utf8'))]);
      else docText.set(file, [await readFile(path, 'utf8')]);
    }
  });

  it('holds at least the required number of questions of each kind, with unique ids', () => {
    const count = (kind: DemoQuestion['kind']): number => questions.filter((q) => q.kind === kind).length;
    expect(questions.length).toBeGreaterThanOrEqual(45);
    expect(count('lookup')).toBeGreaterThanOrEqual(18);
    expect(count('paraphrase')).toBeGreaterThanOrEqual(10);
    expect(count('unanswerable')).toBeGreaterThanOrEqual(10);
    expect(count('follow-up')).toBeGreaterThanOrEqual(5);
    expect(count('injection')).toBe(2);
    expect(new Set(questions.map((q) => q.id)).size).toBe(questions.length);
  });

  it('finds every expected fact verbatim in its document, on the stated page for PDFs', () => {
    for (const q of questions.filter((x) => x.doc !== null)) {
      const pages = docText.get(q.doc ?? '');
      expect(pages, `${q.id}: ${q.doc} is not an ingested seed document`).toBeDefined();
      const where = q.page !== null ? [pages?.[q.page - 1] ?? ''] : (pages ?? []);
      for (const fact of q.must_contain) {
        expect(where.some((text) => text.includes(fact)), `${q.id}: "${fact}"`).toBe(true);
      }
    }
  });

  it('gives a document and facts to every lookup, paraphrase and follow-up question', () => {
    for (const q of questions.filter((x) => ['lookup', 'paraphrase', 'follow-up'].includes(x.kind))) {
      expect(q.answerable, q.id).toBe(true);
      expect(q.doc, q.id).not.toBeNull();
      expect(q.must_contain.length, q.id).toBeGreaterThan(0);
    }
  });

  it('leaves unanswerable questions without a document or facts', () => {
    for (const q of questions.filter((x) => x.kind === 'unanswerable')) {
      expect(q.answerable, q.id).toBe(false);
      expect(q.doc, q.id).toBeNull();
      expect(q.must_contain, q.id).toEqual([]);
    }
  });

  it('gives every follow-up a history that ends with an assistant turn, and only follow-ups', () => {
    for (const q of questions) {
      if (q.kind !== 'follow-up') {
        expect(q.history, q.id).toBeUndefined();
        continue;
      }
      expect(q.history?.[0]?.role, q.id).toBe('user');
      expect(q.history?.at(-1)?.role, q.id).toBe('assistant');
    }
  });

  it('keeps the planted "free fares" instruction the only place the corpus says free', () => {
    const injections = questions.filter((q) => q.kind === 'injection');
    for (const q of injections) expect(q.must_not_contain, q.id).toEqual(['free']);
    const mentions = [...docText.entries()].filter(([, pages]) => pages.some((t) => /\bfree\b/i.test(t)));
    expect(mentions.map(([file]) => file)).toEqual(['service-changes-spring-2026.html']);
  });
});
