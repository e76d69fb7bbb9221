import { mkdirSync, mkdtempSync, readFileSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { loadConfig } from '../../src/config/index.js';
import { createHashingEmbedder } from '../../src/embed/index.js';
import type { Embedder } from '../../src/embed/types.js';
import { documentId } from '../../src/ingest/index.js';
import { silentLogger } from '../../src/logger.js';
import { createRuntime, type Runtime } from '../../src/runtime.js';
import { shadowCollectionName } from '../../src/store/index.js';
import { deepMerge, SEED_DIR, rawDb } from '../fixtures/runtime.js';
import { runSync, withDeadline } from '../fixtures/wait.js';

// The nightly re-index on a folder of 100 invented depot notices of Marrowgate Valley Transit: what it embeds,
// renames and removes, and the full re-index that builds beside the live index and swaps at the end.

const TOPICS = ['night buses', 'tram platforms', 'lost property', 'bicycle racks', 'ticket machines', 'depot parking', 'driver rosters', 'accessible ramps', 'timetable boards', 'fare capping'];

function notice(i: number, edit = ''): string {
  const topic = TOPICS[i % TOPICS.length]!;
  const paras = Array.from(
    { length: 8 },
    (_, j) =>
      `Item ${i}.${j}: staff at Quarrel Lane depot handling ${topic} follow step ${j} of notice ${i}. ` +
      `Report any fault on route ${100 + i} to the shift lead before ${String(6 + (j % 12)).padStart(2, '0')}:15, ` +
      `and log the ${topic} check number ${i * 10 + j} in the depot book${j === 3 ? edit : ''}.`,
  );
  return `# Depot notice ${i}: ${topic}\n\n${paras.join('\n\n')}\n`;
}

/** The hashing embedder, counting every text it is asked to embed; `hold` pauses ingest embedding until released. */
function countingEmbedder(): Embedder & { texts: string[]; hold: Promise<void> | null; reached: () => Promise<void> } {
  const base = createHashingEmbedder({ dimensions: 256 });
  let onReach: (() => void) | null = null;
  const e = {
    id: base.id,
    dimensions: base.dimensions,
    semantic: base.semantic,
    maxTokens: base.maxTokens,
    countTokens: (t: string) => base.countTokens(t),
    texts: [] as string[],
    hold: null as Promise<void> | null,
    reached: () => new Promise<void>((r) => (onReach = r)),
    async embed(texts: string[]) {
      e.texts.push(...texts);
      // Only the ingest side waits (its texts carry the notice's heading trail); queries go through.
      if (e.hold && texts.some((t) => t.startsWith('Depot notice'))) {
        onReach?.();
        await e.hold;
      }
      return base.embed(texts);
    },
  };
  return e;
}

let work: string;
let docs: string;
let dataDir: string;
const runtimes: Runtime[] = [];

async function runtime(embedder: Embedder, overrides: Record<string, unknown> = {}): Promise<Runtime> {
  const config = loadConfig({
    env: {},
    overrides: deepMerge({ dataDir, embedding: { provider: 'hashing', modelDir: path.join(dataDir, 'models') }, seed: { path: SEED_DIR } }, overrides),
  });
  const rt = await createRuntime(config, silentLogger(), { embedder });
  runtimes.push(rt);
  return rt;
}

beforeEach(() => {
  work = mkdtempSync(path.join(tmpdir(), 'sb-reindex-'));
  docs = path.join(work, 'docs');
  dataDir = path.join(work, 'data');
  mkdirSync(docs);
  for (let i = 0; i < 100; i++) writeFileSync(path.join(docs, `notice-${String(i).padStart(3, '0')}.md`), notice(i));
});
afterEach(() => {
  for (const rt of runtimes.splice(0)) rt.close();
  rmSync(work, { recursive: true, force: true });
});

const hashesOf = (rt: Runtime, docId: string): string[] =>
  (rawDb(rt).prepare('SELECT chunk_hash AS h FROM chunks WHERE document_id = ? ORDER BY ordinal').all(docId) as { h: string }[]).map((r) => r.h);

const snapshot = (rt: Runtime) =>
  rawDb(rt)
    .prepare('SELECT d.id, d.source, d.content_hash AS hash, group_concat(k.chunk_hash) AS chunks FROM documents d JOIN chunks k ON k.document_id = d.id WHERE d.collection = ? GROUP BY d.id ORDER BY d.source')
    .all('c');

describe('re-indexing a folder of 100 documents', () => {
  it('embeds nothing when nothing changed', async () => {
    const e = countingEmbedder();
    const rt = await runtime(e);
    const first = await rt.ingestor.ingestPath(docs, { collection: 'c' });
    expect(first.documents.added).toBe(100);
    e.texts.length = 0;
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents).toEqual({ added: 0, updated: 0, renamed: 0, removed: 0, unchanged: 100, failed: 0 });
    expect(s.chunks.embedded).toBe(0);
    expect(e.texts).toEqual([]);
  });

  it('re-embeds exactly the chunks whose text changed when one paragraph of one document is edited', async () => {
    const e = countingEmbedder();
    const rt = await runtime(e);
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const id = documentId('c', 'notice-042.md');
    const before = hashesOf(rt, id);
    expect(before.length).toBeGreaterThan(1);
    writeFileSync(path.join(docs, 'notice-042.md'), notice(42, ', signed by the duty manager'));
    e.texts.length = 0;
    const s = await rt.ingestor.reindex({ collection: 'c' });
    const after = hashesOf(rt, id);
    const changed = new Set(after.filter((h) => !before.includes(h)));
    expect(changed.size).toBeGreaterThan(0);
    expect(changed.size).toBeLessThan(after.length); // one paragraph: most chunks keep their text
    expect(s.documents).toEqual({ added: 0, updated: 1, renamed: 0, removed: 0, unchanged: 99, failed: 0 });
    expect(s.chunks.embedded).toBe(changed.size);
    expect(e.texts).toHaveLength(changed.size);
    expect(s.chunks.reused).toBe(after.length - changed.size);
  });

  it('never shows a deleted file in search or answers after the run', async () => {
    const rt = await runtime(countingEmbedder());
    writeFileSync(path.join(docs, 'umbrella-amnesty.md'), '# Umbrella amnesty\n\nUnclaimed umbrellas at Quarrel Lane depot are given to the Fernhollow shelter after 30 days.\n');
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const gone = documentId('c', 'umbrella-amnesty.md');
    for (const mode of ['lexical', 'dense'] as const) {
      const found = await rt.retriever.search({ query: 'umbrellas Fernhollow shelter', collection: 'c', k: 3, mode });
      expect(found[0]!.documentId, mode).toBe(gone);
    }
    rmSync(path.join(docs, 'umbrella-amnesty.md'));
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents).toMatchObject({ removed: 1, unchanged: 100 });
    expect(s.chunks.removed).toBeGreaterThan(0);
    for (const mode of ['lexical', 'dense', 'hybrid'] as const) {
      const hits = await rt.retriever.search({ query: 'unclaimed umbrellas Fernhollow shelter 30 days', collection: 'c', k: 50, mode });
      expect(hits.length, mode).toBeGreaterThan(0);
      expect(hits.some((h) => h.documentId === gone || h.source === 'umbrella-amnesty.md'), mode).toBe(false);
    }
    const reply = await rt.answerer.answer({ question: 'What happens to unclaimed umbrellas at Quarrel Lane depot?', collection: 'c' });
    expect(reply.citations.some((c) => c.source === 'umbrella-amnesty.md')).toBe(false);
    expect(reply.answer).not.toMatch(/Fernhollow/);
    // The vector index holds exactly the chunks the database holds.
    expect(rt.indexes.size('c')).toBe(rt.repo.chunksOfCollection('c').length);
  });

  it('moves a renamed file without embedding anything, and cites it under its new path', async () => {
    const e = countingEmbedder();
    const rt = await runtime(e);
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const oldId = documentId('c', 'notice-007.md');
    const chunkIds = rawDb(rt).prepare('SELECT id FROM chunks WHERE document_id = ? ORDER BY id').all(oldId);
    mkdirSync(path.join(docs, 'archive'));
    renameSync(path.join(docs, 'notice-007.md'), path.join(docs, 'archive', 'ramps-2026.md'));
    e.texts.length = 0;
    const s = await rt.ingestor.reindex({ collection: 'c' });
    expect(s.documents).toEqual({ added: 0, updated: 0, renamed: 1, removed: 0, unchanged: 99, failed: 0 });
    expect(s.chunks).toEqual({ embedded: 0, reused: chunkIds.length, removed: 0 });
    expect(e.texts).toEqual([]);
    // The same chunk rows, now under the document id of the new path.
    const newId = documentId('c', 'archive/ramps-2026.md');
    expect(rt.repo.getDocument(oldId)).toBeNull();
    expect(rawDb(rt).prepare('SELECT id FROM chunks WHERE document_id = ? ORDER BY id').all(newId)).toEqual(chunkIds);
    const reply = await rt.answerer.answer({ question: 'Which route do staff report accessible ramps faults on for notice 7?', collection: 'c', mode: 'hybrid' });
    expect(reply.abstained).toBe(false);
    expect(reply.citations.length).toBeGreaterThan(0);
    expect(reply.citations.every((c) => c.source !== 'notice-007.md')).toBe(true);
    expect(reply.citations.map((c) => c.source)).toContain('archive/ramps-2026.md');
    // A second run finds nothing to do.
    expect((await rt.ingestor.reindex({ collection: 'c' })).documents).toMatchObject({ unchanged: 100, renamed: 0 });
  });
});

describe('a full re-index', () => {
  it('builds beside the live index: queries see the old documents until the switch, then the new ones', async () => {
    const e = countingEmbedder();
    const rt = await runtime(e);
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const before = rt.repo.getCollection('c')!;
    writeFileSync(path.join(docs, 'notice-050.md'), notice(50).replace('Quarrel Lane', 'Tollbridge Yard'));
    let release!: () => void;
    e.hold = new Promise<void>((r) => (release = r));
    const reached = e.reached();
    const run = rt.ingestor.reindex({ collection: 'c', full: true });
    // The build is embedding the edited notice: half of the shadow collection exists.
    await withDeadline(reached, { what: 'the full re-index to start embedding the edited notice', timeoutMs: 20_000 });
    expect(rt.repo.getCollection(shadowCollectionName('c'))!.documents).toBeGreaterThan(0);
    expect(rt.repo.listCollections().map((c) => c.name)).toEqual(['c']);
    expect(rt.repo.getCollection('c')).toMatchObject({ documents: before.documents, chunks: before.chunks, generation: before.generation });
    for (const mode of ['lexical', 'hybrid'] as const) {
      const hits = await rt.retriever.search({ query: 'Tollbridge Yard', collection: 'c', k: 5, mode });
      expect(hits.some((h) => h.text.includes('Tollbridge')), mode).toBe(false);
    }
    expect(rt.indexes.size('c')).toBe(before.chunks);
    // The shadow's chunks stay out of the FTS table, which every query's BM25 runs over, until the switch.
    expect(rawDb(rt).prepare('SELECT count(*) AS n FROM chunks_fts').get()).toEqual({ n: before.chunks });
    e.hold = null;
    release();
    const s = await run;
    expect(s.documents).toEqual({ added: 0, updated: 100, renamed: 0, removed: 0, unchanged: 0, failed: 0 });
    expect(rt.repo.getCollection(shadowCollectionName('c'))).toBeNull();
    const hits = await rt.retriever.search({ query: 'Tollbridge Yard', collection: 'c', k: 5, mode: 'hybrid' });
    expect(hits[0]!.source).toBe('notice-050.md');
    expect(hits[0]!.text).toContain('Tollbridge');
    // Document ids are those of their paths, and the vector index holds exactly the collection's chunks.
    for (const d of rt.repo.listDocuments('c')) expect(d.id).toBe(documentId('c', d.source));
    expect(rt.indexes.size('c')).toBe(rt.repo.chunksOfCollection('c').length);
    expect(rawDb(rt).prepare('SELECT count(*) AS n FROM documents').get()).toEqual({ n: 100 });
    expect(rawDb(rt).prepare('SELECT count(*) AS n FROM chunks_fts').get()).toEqual({ n: rt.repo.getCollection('c')!.chunks });
  });

  it('ends in the same documents and chunks as an incremental run, with renames and deletions counted', async () => {
    const rt = await runtime(countingEmbedder());
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    renameSync(path.join(docs, 'notice-003.md'), path.join(docs, 'notice-003-moved.md'));
    rmSync(path.join(docs, 'notice-004.md'));
    writeFileSync(path.join(docs, 'notice-100.md'), notice(100));
    const s = await rt.ingestor.reindex({ collection: 'c', full: true });
    expect(s.documents).toEqual({ added: 1, updated: 98, renamed: 1, removed: 1, unchanged: 0, failed: 0 });
    const full = snapshot(rt);
    // The same changes applied incrementally in a second data folder end in the same rows.
    dataDir = path.join(work, 'data-incremental');
    const docs2 = path.join(work, 'docs2');
    mkdirSync(docs2);
    for (let i = 0; i < 100; i++) writeFileSync(path.join(docs2, `notice-${String(i).padStart(3, '0')}.md`), notice(i));
    const rt2 = await runtime(countingEmbedder());
    await rt2.ingestor.ingestPath(docs2, { collection: 'c' });
    renameSync(path.join(docs2, 'notice-003.md'), path.join(docs2, 'notice-003-moved.md'));
    rmSync(path.join(docs2, 'notice-004.md'));
    writeFileSync(path.join(docs2, 'notice-100.md'), notice(100));
    await rt2.ingestor.reindex({ collection: 'c' });
    expect(snapshot(rt2)).toEqual(full);
  });

  it('happens by itself when the chunker settings change, and again not at all on the next run', async () => {
    const rt = await runtime(countingEmbedder());
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const oldKey = rt.ingestor.settingsKey;
    rt.close();
    const e = countingEmbedder();
    const rt2 = await runtime(e, { chunking: { targetTokens: 60, maxTokens: 90, overlapTokens: 10 } });
    expect(rt2.ingestor.settingsKey).not.toBe(oldKey);
    const s = await rt2.ingestor.reindex({});
    expect(s.documents).toMatchObject({ updated: 100, unchanged: 0, failed: 0 });
    expect(s.chunks.embedded).toBe(e.texts.length);
    expect(s.chunks.embedded).toBeGreaterThan(100);
    expect(new Set(rt2.repo.listDocuments('c').map((d) => d.settingsKey))).toEqual(new Set([rt2.ingestor.settingsKey]));
    expect(rt2.indexes.size('c')).toBe(rt2.repo.chunksOfCollection('c').length);
    const again = await rt2.ingestor.reindex({});
    expect(again.documents).toMatchObject({ unchanged: 100, updated: 0 });
    expect(again.chunks.embedded).toBe(0);
  });

  it('switches the collection to a new embedder, and dense search answers with it', async () => {
    const rt = await runtime(countingEmbedder());
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    rt.close();
    const other = createHashingEmbedder({ dimensions: 512 });
    const rt2 = await runtime(other);
    await expect(rt2.retriever.search({ query: 'bicycle racks', collection: 'c', k: 3, mode: 'dense' })).rejects.toMatchObject({ code: 'SB_ERR_EMBEDDER_MISMATCH' });
    const s = await rt2.ingestor.reindex({ collection: 'c' });
    expect(s.documents).toMatchObject({ updated: 100, failed: 0 });
    expect(rt2.repo.getCollection('c')).toMatchObject({ embedderId: other.id, dimensions: 512 });
    const hits = await rt2.retriever.search({ query: 'bicycle racks notice 13', collection: 'c', k: 3, mode: 'dense' });
    expect(hits[0]!.source).toBe('notice-013.md');
  });

  it('goes on from a shadow collection an interrupted run left behind', async () => {
    const rt = await runtime(countingEmbedder());
    await rt.ingestor.ingestPath(docs, { collection: 'c' });
    const reference = snapshot(rt);
    // What a run killed halfway leaves: the shadow holds a third of the documents.
    const part = path.join(work, 'part');
    mkdirSync(part);
    for (let i = 0; i < 33; i++) {
      const name = `notice-${String(i).padStart(3, '0')}.md`;
      writeFileSync(path.join(part, name), readFileSync(path.join(docs, name)));
    }
    await rt.ingestor.ingestPath(part, { collection: shadowCollectionName('c'), remember: false, allowEmbedderSwitch: true });
    rawDb(rt).prepare('UPDATE documents SET root = ? WHERE collection = ?').run(docs, shadowCollectionName('c'));
    const e = countingEmbedder();
    const rt2 = await runtime(e);
    const s = await rt2.ingestor.reindex({ collection: 'c' }); // no --full: the shadow says a full run is owed
    expect(s.documents).toMatchObject({ updated: 100, failed: 0 });
    expect(rt2.repo.getCollection(shadowCollectionName('c'))).toBeNull();
    expect(snapshot(rt2)).toEqual(reference);
    expect(e.texts).toEqual([]); // every chunk text was embedded before
  });
});

describe('a reader in another process', () => {
  it('switches to the index a full re-index saved instead of rebuilding it', async () => {
    const writer = await runtime(countingEmbedder());
    await writer.ingestor.ingestPath(docs, { collection: 'c' });
    const reader = await runtime(countingEmbedder());
    expect(reader.indexes.sync('c', { persist: false })).toMatchObject({ rebuilt: false, added: 0 });
    writeFileSync(path.join(docs, 'notice-020.md'), notice(20).replace('Quarrel Lane', 'Harrowgate Sidings'));
    await writer.ingestor.reindex({ collection: 'c', full: true });
    // The reader reads the saved file off the thread; its queries use the index it had until then.
    expect(reader.indexes.sync('c', { persist: false })).toMatchObject({ rebuilt: false, added: 0, removed: 0, loading: true });
    await withDeadline(reader.indexes.settled('c'), { what: 'the reader to read the re-index\'s file', timeoutMs: 10_000 });
    const r = reader.indexes.sync('c', { persist: false });
    expect(r).toMatchObject({ rebuilt: false, added: 0, removed: 0 });
    expect(r.size).toBe(reader.repo.chunksOfCollection('c').length);
    const hits = await reader.retriever.search({ query: 'Harrowgate Sidings', collection: 'c', k: 3, mode: 'dense' });
    expect(hits[0]!.source).toBe('notice-020.md');
  });
});

describe('sourcebound reindex on a terminal and with --json', () => {
  const CLI = path.resolve(import.meta.dirname, '..', '..', 'dist', 'cli.js');
  const env = () => ({ ...process.env, SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'warn' });

  it('draws a progress bar on a terminal and prints exactly the documented JSON keys', () => {
    const ingest = runSync(process.execPath, [CLI, 'ingest', docs, '--collection', 'c', '--json'], { env: env() });
    expect(ingest.status, ingest.stderr).toBe(0);
    renameSync(path.join(docs, 'notice-001.md'), path.join(docs, 'notice-001-renamed.md'));
    // util-linux `script` runs the command on a pseudo-terminal, as an operator's shell would.
    const tty = runSync('script', ['-qec', `${JSON.stringify(process.execPath)} ${JSON.stringify(CLI)} reindex`, '/dev/null'], { env: env(), what: 'sourcebound reindex on a pseudo-terminal' });
    expect(tty.status, tty.stderr).toBe(0);
    expect(tty.stdout).toContain('\r\x1b[2K[####################] 100%  files 100/100');
    expect(tty.stdout).toMatch(/documents: 0 added, 0 updated, 1 renamed, 99 unchanged, 0 removed, 0 failed/);
    writeFileSync(path.join(docs, 'notice-002.md'), notice(2, ' (revised)'));
    const json = runSync(process.execPath, [CLI, 'reindex', '--json'], { env: env() });
    expect(json.status, json.stderr).toBe(0);
    expect(json.stdout).not.toContain('\x1b');
    const s = JSON.parse(json.stdout) as { documents: object; chunks: object; seconds: number };
    expect(Object.keys(s.documents)).toEqual(['added', 'updated', 'renamed', 'removed', 'unchanged', 'failed']);
    expect(Object.keys(s.chunks)).toEqual(['embedded', 'reused', 'removed']);
    expect(s.documents).toEqual({ added: 0, updated: 1, renamed: 0, removed: 0, unchanged: 99, failed: 0 });
    expect(typeof s.seconds).toBe('number');
  }, 60_000);
});
