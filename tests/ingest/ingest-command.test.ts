// `sourcebound ingest --json` as an operator runs it: the compiled CLI (built by the test setup) in a
// child process, on a folder with one good and two bad files.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { expect, it } from 'vitest';
import { ENCRYPTED_MESSAGE } from '../../src/ingest/load-pdf.js';
import { runSync } from '../fixtures/wait.js';
import { buildEncryptedPdf } from './pdf-fixture.js';

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const CLI = path.join(ROOT, 'dist', 'cli.js');

it('prints one JSON summary with each failure and its reason, and exits 1 when a file failed', () => {
  const data = mkdtempSync(path.join(tmpdir(), 'sb-cli-data-'));
  const docs = mkdtempSync(path.join(tmpdir(), 'sb-cli-docs-'));
  try {
    writeFileSync(path.join(docs, 'fares.md'), '# Fares\n\nA single tram fare is 2.40 and a day pass is 6.00.\n');
    writeFileSync(path.join(docs, 'locked.pdf'), buildEncryptedPdf());
    writeFileSync(path.join(docs, 'empty.txt'), '');
    const env = { ...process.env, SOURCEBOUND_DATA_DIR: data, SOURCEBOUND_EMBEDDER: 'hashing' };
    const r = runSync(process.execPath, [CLI, 'ingest', docs, '--collection', 'c', '--json'], { cwd: ROOT, env });
    expect(r.status, r.stderr).toBe(1);
    const lines = r.stdout.trim().split('\n');
    expect(lines).toHaveLength(1);
    const s = JSON.parse(lines[0]!) as {
      documents: Record<string, number>;
      chunks: Record<string, number>;
      failures: { source: string; reason: string }[];
      seconds: number;
    };
    expect(s.documents).toMatchObject({ added: 1, updated: 0, unchanged: 0, failed: 2 });
    expect(s.chunks.embedded).toBeGreaterThan(0);
    expect(s.chunks.reused).toBe(0);
    expect(s.failures).toEqual([
      { source: 'empty.txt', reason: 'the file is empty' },
      { source: 'locked.pdf', reason: ENCRYPTED_MESSAGE },
    ]);
    expect(s.seconds).toBeGreaterThanOrEqual(0);
  } finally {
    rmSync(data, { recursive: true, force: true });
    rmSync(docs, { recursive: true, force: true });
  }
});
