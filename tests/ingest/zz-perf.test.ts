import { it } from 'vitest';
import { chunkDocument } from '../../src/ingest/chunk.js';
import { buildNormalisedDocument } from '../../src/ingest/normalise.js';
import type { Block } from '../../src/types.js';
const count = (t: string) => Math.ceil(t.length / 4) + 2;
function run(name: string, blocks: Block[]) {
  const doc = buildNormalisedDocument(blocks);
  const t0 = Date.now();
  const chunks = chunkDocument(doc, { targetTokens: 256, maxTokens: 384, overlapTokens: 32, countTokens: count });
  console.log(name, 'chars', doc.text.length, 'chunks', chunks.length, 'ms', Date.now() - t0, 'max', Math.max(...chunks.map((c) => c.tokenCount)));
}
it('sections', () => {
  const blocks: Block[] = [];
  for (let s = 0; s < 300; s++) {
    blocks.push({ kind: 'heading', level: 2, text: `Section ${s}` });
    for (let p = 0; p < 8; p++) blocks.push({ kind: 'paragraph', text: Array.from({ length: 6 }, (_, k) => `Sentence ${k} of paragraph ${p} explains the refund rule for route ${s} in some detail here.`).join(' ') });
  }
  run('sections', blocks);
});
it('words', () => { run('words', [{ kind: 'paragraph', text: Array.from({ length: 5_000 }, (_, i) => `w${i}`).join(' ') }]); });
it('blob', () => { run('blob', [{ kind: 'paragraph', text: 'x'.repeat(30_000) }]); });
