import { mkdirSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { tempRuntime } from '../fixtures/runtime.js';

// A document that states its version has it stored with the document and returned with every search hit
// and citation from it; one that states none returns null. (Invented fixture documents.)

let env: Awaited<ReturnType<typeof tempRuntime>>;

beforeAll(async () => {
  env = await tempRuntime({ seed: { ingestOnEmpty: false } });
  const dir = path.join(env.dataDir, 'docs');
  mkdirSync(dir);
  writeFileSync(
    path.join(dir, 'uniform-policy.md'),
    '---\ntitle: Uniform Policy\nversion: 3.2\n---\n\n# Uniform Policy\n\n## Jackets\n\nReflective jackets are worn at every stop after dark by all depot staff.\n',
  );
  writeFileSync(
    path.join(dir, 'canteen-rules.md'),
    '# Canteen Rules\n\n## Opening\n\nThe depot canteen opens at six in the morning on working days.\n',
  );
  await env.rt.ingestor.ingestPath(dir, { collection: 'default' });
});

afterAll(() => env.cleanup());

describe('document version on hits and citations', () => {
  it('returns the stated version with search hits, and null where none is stated', async () => {
    const jackets = await env.rt.retriever.search({ query: 'reflective jackets after dark', collection: 'default', k: 3, mode: 'lexical' });
    expect(jackets[0]!.source).toBe('uniform-policy.md');
    expect(jackets[0]!.version).toBe('3.2');
    const canteen = await env.rt.retriever.search({ query: 'canteen opening time', collection: 'default', k: 3, mode: 'lexical' });
    expect(canteen[0]!.source).toBe('canteen-rules.md');
    expect(canteen[0]!.version).toBeNull();
  });

  it('carries the version into the citations of an answer', async () => {
    const r = await env.rt.extractiveAnswerer.answer({ question: 'When are reflective jackets worn at stops?', collection: 'default' });
    expect(r.abstained).toBe(false);
    expect(r.citations[0]!.source).toBe('uniform-policy.md');
    expect(r.citations[0]!.version).toBe('3.2');
  });
});
