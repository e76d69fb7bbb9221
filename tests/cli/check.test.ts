import { mkdirSync, readFileSync, rmSync, unlinkSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDocumentApi } from '../../src/runtime.js';
import { storePaths } from '../../src/store/index.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { CLI } from '../fixtures/serve.js';
import { runSync, withDeadline } from '../fixtures/wait.js';

// `sourcebound check` on a store made the ordinary way (a folder ingested, two uploads), then with one fault
// planted at a time: each must turn the exit code to 1 and name the file.

let dataDir: string;
let cleanup: () => void;

beforeAll(async () => {
  const made = await tempRuntime();
  ({ dataDir, cleanup } = made);
  const folder = path.join(dataDir, 'folder');
  mkdirSync(folder);
  writeFileSync(path.join(folder, 'night-buses.md'), '# Night buses\n\nNight buses leave Marrowgate bus station every 30 minutes after midnight.\n');
  writeFileSync(path.join(folder, 'bikes.md'), '# Bikes\n\nFolded bicycles may be taken on every Brackenfold tram at any hour.\n');
  await made.rt.ingestor.ingestPath(folder, { collection: 'handbook' });
  const { queue, documents } = createDocumentApi(made.rt, 'inline');
  await documents.upload('uploads', 'fares.md', new TextEncoder().encode('# Fares\n\nA day ticket costs 5.40 on trams and buses alike.\n'));
  await documents.upload('uploads', 'dogs.md', new TextEncoder().encode('# Dogs\n\nDogs on a lead travel free of charge.\n'));
  await withDeadline(queue.idle(), { what: 'the uploads to be ingested', timeoutMs: 20_000 });
  await queue.close();
  made.rt.close();
});
afterAll(() => cleanup());

const check = (...args: string[]) =>
  runSync(process.execPath, [CLI, 'check', ...args], {
    env: { ...process.env, SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent' },
    what: 'sourcebound check',
  });

describe('sourcebound check', () => {
  it('exits 0 on a clean store, with a text report and a JSON one', () => {
    const text = check();
    expect(text.status, text.stdout + text.stderr).toBe(0);
    expect(text.stdout).toContain('2 collections, 2 vector index files, 2 kept originals, 2 uploads');
    expect(text.stdout).toContain('no problems found');
    const json = check('--json');
    expect(json.status).toBe(0);
    expect(JSON.parse(json.stdout)).toMatchObject({ ok: true, problems: [], checked: { collections: 2, indexFiles: 2, originals: 2, uploads: 2 } });
  });

  it('exits 1 naming an orphan file: a kept original no document has, and an upload no document comes from', () => {
    const orphan = path.join(storePaths(dataDir).originalsDir, 'uploads', 'f'.repeat(64));
    const stray = path.join(dataDir, 'uploads', 'uploads', 'stray.md');
    for (const f of [orphan, stray]) {
      writeFileSync(f, 'nobody refers to this');
      const r = check('--json');
      expect(r.status).toBe(1);
      expect(JSON.parse(r.stdout).problems).toEqual([expect.objectContaining({ check: 'orphan file', path: f })]);
      unlinkSync(f);
    }
    expect(check().status).toBe(0);
  });

  it('exits 1 naming a vector index file that was removed', () => {
    const { indexDir } = storePaths(dataDir);
    const meta = JSON.parse(readFileSync(path.join(indexDir, 'handbook.meta.json'), 'utf8')) as { file: string };
    const file = path.join(indexDir, meta.file);
    const bytes = readFileSync(file);
    rmSync(file);
    try {
      const r = check();
      expect(r.status).toBe(1);
      expect(r.stdout).toContain(`problem: vector index: collection handbook: its index file is missing (${file})`);
      expect(r.stdout).toContain('1 problem found');
    } finally {
      writeFileSync(file, bytes);
    }
    expect(check().status).toBe(0);
  });
});
