// A PDF laid out the way many policy documents are (a title that the footer repeats, a date line
// under it, numbered sections with sentence-case sub-headings, a table, a paragraph that runs over a
// page break), ingested, searched and cited: the citation must name the sub-section and the page
// the quoted words are printed on. All text is invented.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { citationFor } from '../../src/answer/cite.js';
import { buildContext } from '../../src/answer/context.js';
import { splitSentences } from '../../src/answer/sentences.js';
import { loadPdf } from '../../src/ingest/load-pdf.js';
import type { Citation, LoadedDocument } from '../../src/types.js';
import { tempRuntime } from '../fixtures/runtime.js';
import type { Runtime } from '../../src/runtime.js';
import { buildPdf } from './pdf-fixture.js';

const TITLE = 'Orchard Lane Allotment Rules';
const PAGE_2_SENTENCE = 'Each holder may fill two water butts a week from the taps.';

function rulesPdf(): Promise<Uint8Array> {
  return buildPdf(
    [
      {
        lines: [
          TITLE,
          'Issued by the Plot Committee · Kept by the Site Secretary · Checked every May',
          '1. Plots and tenancy',
          'Every plot is let for one growing year at a time, and the tenancy renews each March unless the',
          'committee has written to the holder before the end of January to say that it will not.',
          'Plot holders keep their plot tidy and cultivate at least three quarters of it in every season.',
          '2. Water',
          'Hoses and taps',
          'Taps on the main path are open from April to October. Hoses must be held by hand while',
          'watering, and sprinklers left running on their own are not allowed on any plot at any time of',
          'the day, because the supply is shared by every holder on the site and the pressure drops for',
        ],
      },
      {
        lines: [
          `everyone further down the hill. ${PAGE_2_SENTENCE}`,
          'Rainwater collection',
          'Water butts must have a fitted lid so that children and wildlife cannot fall into them at all.',
          'The yearly rent depends on the size of the plot, and a deposit is held until the key is back.',
          'Plot size Yearly rent Deposit',
          'Half plot 20 pounds 10 pounds',
          'Full plot 35 pounds 10 pounds',
          '3. Leaving a plot',
          'A holder who gives up a plot returns the gate key to the Site Secretary within 14 days of leaving.',
        ],
      },
    ],
    { footer: TITLE },
  );
}

describe('headings in a PDF without font information', () => {
  let doc: LoadedDocument;
  beforeAll(async () => {
    doc = await loadPdf(await rulesPdf(), 'allotment-rules.pdf');
  });

  it('keeps the title printed at the top of page 1 although the footer repeats it on every page', () => {
    expect(doc.blocks[0]).toMatchObject({ kind: 'heading', level: 1, text: TITLE, page: 1 });
    expect(doc.blocks.filter((b) => b.text.includes(TITLE))).toHaveLength(1);
  });

  it('finds numbered headings after an unfinished line when their neighbours in the numbering are headings', () => {
    const headings = doc.blocks.filter((b) => b.kind === 'heading').map((b) => [b.text, b.level, b.page]);
    expect(headings).toEqual([
      [TITLE, 1, 1],
      ['1. Plots and tenancy', 2, 1],
      ['2. Water', 2, 1],
      ['Hoses and taps', 3, 1],
      ['Rainwater collection', 3, 2],
      ['3. Leaving a plot', 2, 2],
    ]);
  });

  it('does not glue a sentence-case sub-heading onto the prose after it, nor make headings of table rows', () => {
    const body = doc.blocks.filter((b) => b.kind !== 'heading').map((b) => b.text);
    expect(body.some((t) => t.startsWith('Taps on the main path'))).toBe(true);
    expect(body.some((t) => t.startsWith('Water butts must have'))).toBe(true);
    expect(body.some((t) => /Hoses and taps|Rainwater collection/.test(t))).toBe(false);
    const table = doc.blocks.find((b) => b.kind === 'table');
    expect(table?.text).toBe('Plot size Yearly rent Deposit\nHalf plot 20 pounds 10 pounds\nFull plot 35 pounds 10 pounds');
  });

  it('records where page 2 begins inside the paragraph that runs over the page break', () => {
    const para = doc.blocks.find((b) => b.text.startsWith('Taps on the main path'))!;
    expect([para.page, para.pageEnd]).toEqual([1, 2]);
    const at = para.text.indexOf('everyone further down the hill.');
    expect(para.pageBreaks).toEqual([{ at, page: 2 }]);
  });
});

describe('a citation from that PDF, through the store and the retriever', () => {
  let rt: Runtime;
  let cleanup: () => void;
  let dir: string;

  beforeAll(async () => {
    ({ rt, cleanup } = await tempRuntime());
    dir = mkdtempSync(path.join(tmpdir(), 'sb-pdf-cite-'));
    writeFileSync(path.join(dir, 'allotment-rules.pdf'), await rulesPdf());
    const s = await rt.ingestor.ingestPath(dir, { collection: 'c' });
    expect(s.failures).toEqual([]);
  });
  afterAll(() => {
    cleanup();
    rmSync(dir, { recursive: true, force: true });
  });

  /** The citation of the sentence holding `words`, from the best lexical hit, as the answer stage builds it. */
  async function citeSentence(words: string): Promise<Citation> {
    const hits = await rt.retriever.search({ query: words, collection: 'c', k: 3, mode: 'lexical' });
    const hit = hits.find((h) => h.text.includes(words));
    expect(hit, words).toBeDefined();
    const [source] = buildContext([hit!], { budgetTokens: 100_000, countTokens: (s) => s.length });
    const at = source!.text.indexOf(words);
    const sentence = splitSentences(source!.text).find((s) => s.start <= at && at < s.end)!;
    return citationFor(source!, sentence.start, sentence.end, 1);
  }

  it('names the page the quote is printed on, not the page its chunk starts on', async () => {
    const c = await citeSentence('two water butts a week');
    expect(c.quote).toBe(PAGE_2_SENTENCE);
    expect(c.page).toBe(2);
    // The chunk holding it starts on page 1, under the same sub-heading.
    const hits = await rt.retriever.search({ query: 'two water butts a week', collection: 'c', k: 3, mode: 'lexical' });
    expect(hits.find((h) => h.text.includes(PAGE_2_SENTENCE))?.page).toBe(1);
  });

  it('keeps page 1 for a quote before the page break in the same chunk', async () => {
    const c = await citeSentence('Taps on the main path');
    expect(c.page).toBe(1);
  });

  it('names the sub-section, and quotes the sentence without its heading', async () => {
    const taps = await citeSentence('Taps on the main path');
    expect(taps.section).toBe(`${TITLE} > 2. Water > Hoses and taps`);
    expect(taps.quote).toBe('Taps on the main path are open from April to October.');
    const lids = await citeSentence('fitted lid');
    expect(lids.section).toBe(`${TITLE} > 2. Water > Rainwater collection`);
    expect(lids.page).toBe(2);
    expect(lids.quote.startsWith('Water butts must have a fitted lid')).toBe(true);
  });
});
