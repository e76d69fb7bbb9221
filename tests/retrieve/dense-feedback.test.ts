import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { loadConfig } from '../../src/config/index.js';
import { createHashingEmbedder } from '../../src/embed/hashing.js';
import { silentLogger } from '../../src/logger.js';
import { createRuntime, type Runtime } from '../../src/runtime.js';

// Hybrid search moves the dense query toward the top lexical hits (Rocchio 1971). When one passage matches
// the question and RM3's expansion terms pull in a crowd of barely-matching ones behind it, that crowd must
// not drag the dense leg away: the passage both legs rank first on their own stays first when fused.
// Invented fixture: 100 depot notices and one notice on another subject.

const TOPICS = ['night buses', 'tram platforms', 'lost property', 'bicycle racks', 'ticket machines'];
const notice = (i: number) =>
  `# Depot notice ${i}: ${TOPICS[i % TOPICS.length]}\n\n` +
  Array.from({ length: 6 }, (_, j) => `Item ${i}.${j}: staff at Quarrel Lane depot follow step ${j} of notice ${i}. Report problems to the duty manager.`).join('\n\n');

let rt: Runtime;
let dataDir: string;

beforeAll(async () => {
  dataDir = mkdtempSync(path.join(tmpdir(), 'sb-fb-'));
  const docs = path.join(dataDir, 'docs');
  mkdirSync(docs);
  for (let i = 0; i < 100; i++) writeFileSync(path.join(docs, `notice-${i}.md`), notice(i));
  writeFileSync(path.join(docs, 'umbrella-amnesty.md'), '# Umbrella amnesty\n\nUnclaimed umbrellas at Quarrel Lane depot are given to the Fernhollow shelter after 30 days.\n');
  const config = loadConfig({ env: {}, overrides: { dataDir, seed: { ingestOnEmpty: false } } });
  rt = await createRuntime(config, silentLogger(), { embedder: createHashingEmbedder({ dimensions: 256 }) });
  await rt.ingestor.ingestPath(docs, { collection: 'c' });
});

afterAll(() => {
  rt.close();
  rmSync(dataDir, { recursive: true, force: true });
});

describe('dense feedback in hybrid search', () => {
  it('keeps the passage both legs rank first at the top of the fused list', async () => {
    const q = 'umbrellas Fernhollow shelter';
    for (const mode of ['lexical', 'dense'] as const) {
      const hits = await rt.retriever.search({ query: q, collection: 'c', k: 3, mode });
      expect(hits[0]!.source, mode).toBe('umbrella-amnesty.md');
    }
    const fused = await rt.retriever.search({ query: q, collection: 'c', k: 3, mode: 'hybrid' });
    expect(fused[0]!.source).toBe('umbrella-amnesty.md');
    expect(fused[0]!.ranks).toEqual({ lexical: 1, dense: 1 });
  });
});
