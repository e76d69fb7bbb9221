// The ingest pipeline end to end, through the store and the retriever: what the loaders keep and drop
// must be what search finds and cites.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { buildDocx } from './docx-fixture.js';
import { HANDBOOK_HEADER, HANDBOOK_PAGE_3_SENTENCE, staffHandbookPdf } from './pdf-fixture.js';

let rt: Runtime;
let cleanup: () => void;
let docs: string;
let config: Awaited<ReturnType<typeof tempRuntime>>['config'];

// A section long enough that, at 40-token chunks, most of its chunks hold none of its heading words.
const ELIGIBILITY = [
  'A claim is accepted when the tram or bus arrived at least fifteen minutes after the timetable said.',
  'The ticket or pass used for the journey must be valid on the day of travel and shown with the claim.',
  'Journeys on the night network count in the same way as daytime journeys, with no separate rules.',
  'Season pass holders may claim for up to ten late journeys in each calendar month of their pass.',
  'Staff travel passes and free companion tickets are outside this scheme and cannot be claimed for.',
].join(' ');

beforeAll(async () => {
  ({ rt, cleanup, config } = await tempRuntime({ chunking: { targetTokens: 40, maxTokens: 60, overlapTokens: 8 } }));
  docs = mkdtempSync(path.join(tmpdir(), 'sb-structure-'));
  writeFileSync(path.join(docs, 'staff-handbook.pdf'), await staffHandbookPdf());
  writeFileSync(
    path.join(docs, 'delay-refunds.md'),
    `---\ntitle: Delay refunds\nversion: 2026.1\n---\n# Delay refunds\n\nEffective from 1 April 2026.\n\n## Eligibility\n\n${ELIGIBILITY}\n\n## Payment\n\nMoney goes back to the card that paid.\n`,
  );
  writeFileSync(
    path.join(docs, 'bikes.docx'),
    buildDocx([
      { heading: 1, text: 'Bikes on Board' },
      { heading: 2, text: 'Folding bikes' },
      { paragraph: 'Folded bicycles travel free at all times when kept in a bag.' },
      { table: [['Vehicle', 'Full-size bikes'], ['Tram', 'Two per car off-peak'], ['Bus', 'None']] },
    ]),
  );
  const s = await rt.ingestor.ingestPath(docs, { collection: 'c' });
  expect(s.failures).toEqual([]);
  expect(s.documents.added).toBe(3);
});
afterAll(() => {
  cleanup();
  rmSync(docs, { recursive: true, force: true });
});

function chunksOf(source: string): { text: string; pageStart: number | null; pageEnd: number | null; headingPath: string[] }[] {
  const doc = rt.repo.getDocumentBySource('c', source)!;
  const views = rt.repo.chunkViews(rt.repo.chunksOfCollection('c').map((c) => c.id));
  return [...views.values()].filter((v) => v.documentId === doc.id);
}

describe('a PDF with running lines and a hyphenated line end, ingested and searched', () => {
  it('puts the running header and footer text in no chunk', () => {
    const chunks = chunksOf('staff-handbook.pdf');
    expect(chunks.length).toBeGreaterThan(1);
    for (const c of chunks) {
      expect(c.text).not.toContain('Staff Handbook - Issue');
      expect(c.text).not.toMatch(/Page \d of 3/);
    }
    const doc = rt.repo.getDocumentBySource('c', 'staff-handbook.pdf')!;
    expect(rt.repo.getDocumentText(doc.id)).not.toContain(HANDBOOK_HEADER);
  });

  it('does not find the handbook by a word that only its running header holds', async () => {
    const hits = await rt.retriever.search({ query: 'Marrowgate Valley', collection: 'c', k: 10, mode: 'lexical' });
    expect(hits.filter((h) => h.source === 'staff-handbook.pdf')).toEqual([]);
  });

  it('finds the rejoined word by lexical, dense and hybrid search', async () => {
    for (const mode of ['lexical', 'dense', 'hybrid'] as const) {
      const hits = await rt.retriever.search({ query: 'shift supervisor', collection: 'c', k: 3, mode });
      expect(hits[0]?.source, mode).toBe('staff-handbook.pdf');
      expect(hits[0]?.text, mode).toContain('shift supervisor on request');
    }
    const torn = await rt.retriever.search({ query: 'supervi', collection: 'c', k: 3, mode: 'lexical' });
    expect(torn.every((h) => !h.text.includes('supervi-'))).toBe(true);
  });

  it('cites page 3 for the sentence on page 3, through POST /v1/search', async () => {
    const app = buildApp(config, appDeps(rt, () => true));
    try {
      const res = await app.inject({
        method: 'POST',
        url: '/v1/search',
        payload: { query: 'faulty ticket machine depot controller', collection: 'c', k: 3, mode: 'lexical' },
      });
      expect(res.statusCode).toBe(200);
      const top = (res.json() as { results: { text: string; page: number; source: string; effectiveDate: string }[] }).results[0]!;
      expect(top.text).toContain(HANDBOOK_PAGE_3_SENTENCE);
      expect([top.source, top.page]).toEqual(['staff-handbook.pdf', 3]);
      expect(top.effectiveDate).toBe('2026-03-01');
    } finally {
      await app.close();
    }
  });

  it('stores page count, byte size, content hash and the version from the removed header', () => {
    const doc = rt.repo.getDocumentBySource('c', 'staff-handbook.pdf')!;
    expect(doc.pageCount).toBe(3);
    expect(doc.byteSize).toBeGreaterThan(500);
    expect(doc.contentHash).toMatch(/^[0-9a-f]{64}$/);
    expect(doc.metadata['version']).toBe('4');
    expect(doc.title).toBe('MVT Staff Handbook');
  });
});

describe('heading paths', () => {
  it('make a chunk under "Delay refunds > Eligibility" findable by those words though its text lacks them', async () => {
    const section = chunksOf('delay-refunds.md').filter((c) => c.headingPath.join(' > ') === 'Delay refunds > Eligibility');
    const bare = section.filter((c) => !/eligib|delay|refund/i.test(c.text));
    expect(bare.length).toBeGreaterThan(0);
    const hits = await rt.retriever.search({ query: 'eligibility', collection: 'c', k: 20, mode: 'lexical' });
    const found = hits.filter((h) => bare.some((c) => c.text === h.text));
    expect(found.length).toBe(bare.length);
    for (const h of found) {
      expect(h.headingPath).toEqual(['Delay refunds', 'Eligibility']);
      // The quote is the document's own text: the heading path is never added to it.
      expect(rt.repo.getDocumentText(h.documentId)!.slice(h.start, h.end)).toBe(h.text);
    }
  });

  it('steer dense search to the section whose headings match the question', async () => {
    const hits = await rt.retriever.search({ query: 'delay refunds eligibility', collection: 'c', k: 3, mode: 'dense' });
    expect(hits[0]!.headingPath).toEqual(['Delay refunds', 'Eligibility']);
  });

  it('return the effective date and keep the front-matter version on the document', async () => {
    const hits = await rt.retriever.search({ query: 'card that paid', collection: 'c', k: 1, mode: 'lexical' });
    expect(hits[0]!.effectiveDate).toBe('2026-04-01');
    expect(rt.repo.getDocumentBySource('c', 'delay-refunds.md')!.metadata['version']).toBe('2026.1');
  });
});

describe('a DOCX in the folder', () => {
  it('is indexed with its headings and table rows intact', async () => {
    const chunks = chunksOf('bikes.docx');
    expect(chunks.some((c) => c.text.includes('Tram | Two per car off-peak'))).toBe(true);
    const hits = await rt.retriever.search({ query: 'full-size bikes tram', collection: 'c', k: 1, mode: 'lexical' });
    expect(hits[0]!.source).toBe('bikes.docx');
    expect(hits[0]!.headingPath).toEqual(['Bikes on Board', 'Folding bikes']);
    expect(rt.repo.getDocumentBySource('c', 'bikes.docx')!.metadata['source_format']).toBe('docx');
  });
});
