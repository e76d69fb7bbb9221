// The chunk limit is counted in the active embedder's own tokens: checked here with both embedders
// the service ships (the hashing fallback and transformers.js, on the tiny generated test model,
// a stand-in for a real WordPiece model), on generated documents and on the demo corpus.
import fc from 'fast-check';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createHashingEmbedder, createTransformersEmbedder } from '../../src/embed/index.js';
import type { Embedder } from '../../src/embed/types.js';
import { chunkDocument } from '../../src/ingest/chunk.js';
import { buildNormalisedDocument } from '../../src/ingest/normalise.js';
import type { Block } from '../../src/types.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';
import { TINY_MAX_LENGTH, writeTinyModel } from '../fixtures/tiny-model.js';

let dir: string;
let tiny: Embedder;
const hashing = createHashingEmbedder();

beforeAll(async () => {
  dir = mkdtempSync(path.join(tmpdir(), 'sb-tiny-'));
  const model = await writeTinyModel(dir);
  tiny = await createTransformersEmbedder({ modelId: model.modelId, modelDir: model.modelDir });
}, 60_000);
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const WORDS = ['fare', 'refunds', 'tram', 'Marrowgate', 'minutes', '£2.40', 'e.g.', 'café', 'Straßenbahn', '時刻表', '🚋', 'unbelievably', '3.5', '—'];
const word = fc.constantFrom(...WORDS);
const sentence = fc.array(word, { minLength: 1, maxLength: 30 }).map((ws) => `${ws.join(' ')}.`);
const blockArb: fc.Arbitrary<Block> = fc.oneof(
  fc.array(word, { minLength: 1, maxLength: 5 }).map((ws): Block => ({ kind: 'heading', level: 2, text: ws.join(' ') })),
  fc.array(sentence, { minLength: 1, maxLength: 8 }).map((ss): Block => ({ kind: 'paragraph', text: ss.join(' ') })),
  fc.array(fc.array(word, { minLength: 1, maxLength: 5 }), { minLength: 1, maxLength: 8 }).map((rows): Block => ({ kind: 'table', text: rows.map((r) => r.join(' | ')).join('\n') })),
  // One run with no spaces at all, so the character-level cut runs under a real tokenizer too.
  fc.integer({ min: 1, max: 400 }).map((n): Block => ({ kind: 'paragraph', text: 'Straßenbahnhaltestelle'.repeat(n) })),
);
const docArb = fc.array(blockArb, { minLength: 1, maxLength: 12 }).map(buildNormalisedDocument);

describe.each([
  ['hashing', () => hashing],
  ['transformers (tiny test model)', () => tiny],
])('chunks counted in the %s embedder\'s tokens', (_name, embedder) => {
  it('map back to their offsets, cover all text and never exceed maxTokens', () => {
    const e = embedder();
    fc.assert(
      fc.property(docArb, fc.integer({ min: 8, max: 60 }), fc.integer({ min: 0, max: 30 }), (doc, target, extra) => {
        const max = target + extra;
        const chunks = chunkDocument(doc, { targetTokens: target, maxTokens: max, overlapTokens: 8, countTokens: (t) => e.countTokens(t) });
        const covered = new Uint8Array(doc.text.length);
        for (const c of chunks) {
          expect(doc.text.slice(c.start, c.end)).toBe(c.text);
          expect(e.countTokens(c.text)).toBeLessThanOrEqual(max);
          covered.fill(1, c.start, c.end);
        }
        for (let i = 0; i < doc.text.length; i++) if (!/\s/.test(doc.text[i]!)) expect(covered[i]).toBe(1);
      }),
      { numRuns: 60 },
    );
  });
});

describe('the demo corpus ingested with the transformers embedder on the tiny test model', () => {
  it('stores chunks whose embedded text (heading path + text) fits the model, so nothing is truncated', async () => {
    const { rt, cleanup } = await tempRuntime({}, { embedder: tiny });
    try {
      const s = await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
      expect(s.failures).toEqual([]);
      const views = [...rt.repo.chunkViews(rt.repo.chunksOfCollection('default').map((c) => c.id)).values()];
      expect(views.length).toBeGreaterThan(50);
      for (const v of views) {
        const trail = v.headingPath[0] === v.title ? v.headingPath : [v.title, ...v.headingPath];
        // +2 for [CLS] and [SEP], which countTokens leaves out.
        expect(tiny.countTokens(`${trail.join(' > ')}\n${v.text}`) + 2).toBeLessThanOrEqual(TINY_MAX_LENGTH);
      }
    } finally {
      cleanup();
    }
  });
});

describe('the heading trail added before embedding', () => {
  it('gives way, outermost heading first, when it would push the text past the model limit', async () => {
    const seen: string[] = [];
    const words = (t: string): number => t.split(/\s+/).filter(Boolean).length;
    // A word-counting embedder with a 60-token window records what it is asked to embed.
    const small: Embedder = {
      id: 'test-words-60',
      dimensions: 4,
      semantic: false,
      maxTokens: 60,
      countTokens: words,
      async embed(texts) {
        seen.push(...texts);
        return texts.map(() => Float32Array.from([0.5, 0.5, 0.5, 0.5]));
      },
    };
    const { rt, cleanup } = await tempRuntime({}, { embedder: small });
    const docs = mkdtempSync(path.join(tmpdir(), 'sb-trail-'));
    try {
      const longHeading = Array.from({ length: 45 }, (_, i) => `clause${i}`).join(' ');
      const body = 'Refunds are paid to the card used. '.repeat(12);
      writeFileSync(path.join(docs, 'a.md'), `# Refunds\n\n## Short\n\n${body}\n\n## ${longHeading}\n\n${body}\n`);
      const s = await rt.ingestor.ingestPath(docs, { collection: 'c' });
      expect(s.failures).toEqual([]);
      expect(seen.length).toBeGreaterThan(2);
      for (const t of seen) expect(words(t) + 2).toBeLessThanOrEqual(60);
      // A short trail is kept whole.
      expect(seen.some((t) => t.startsWith('Refunds > Short\n'))).toBe(true);
    } finally {
      cleanup();
      rmSync(docs, { recursive: true, force: true });
    }
  });
});
