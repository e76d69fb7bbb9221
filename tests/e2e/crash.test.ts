import { spawn, spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

// Crash tests in SQLite's manner: a real `sourcebound ingest` process is killed with SIGKILL at several
// points of its run; after each kill the database passes an integrity check, every document is either
// fully indexed or absent, search works, and the next run ends in the same state as an uninterrupted run.

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const CLI = path.join(ROOT, 'dist', 'cli.js');
let docs: string;
let work: string;

const TOPICS = ['fares', 'refunds', 'bikes', 'dogs', 'prams', 'luggage', 'tickets', 'passes', 'delays', 'stops'];

beforeAll(() => {
  work = mkdtempSync(path.join(tmpdir(), 'sb-crash-'));
  docs = path.join(work, 'docs');
  mkdirSync(docs);
  for (let i = 0; i < 120; i++) {
    const t = TOPICS[i % TOPICS.length]!;
    const paras = Array.from({ length: 12 }, (_, j) => `Rule ${i}.${j} about ${t}: passengers travelling with ${t} on route ${i} must follow clause ${j} of the policy on ${t}, effective from the timetable change.`);
    writeFileSync(path.join(docs, `policy-${String(i).padStart(3, '0')}.md`), `# Policy ${i} on ${t}\n\n${paras.join('\n\n')}\n`);
  }
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

const env = (dataDir: string) => ({ ...process.env, SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'warn' });

function ingestOnce(dataDir: string): { documents: Record<string, number> } {
  const r = spawnSync(process.execPath, [CLI, 'ingest', docs, '--collection', 'c', '--json'], { env: env(dataDir), encoding: 'utf8' });
  if (r.status !== 0) throw new Error(r.stderr);
  return JSON.parse(r.stdout) as { documents: Record<string, number> };
}

function state(dataDir: string): { docs: string[]; chunks: number; integrity: string; halfIndexed: number } {
  const db = new Database(path.join(dataDir, 'sourcebound.db'), { readonly: true });
  try {
    const integrity = db.pragma('integrity_check', { simple: true }) as string;
    const docsRows = db.prepare('SELECT source, content_hash FROM documents ORDER BY source').all() as { source: string; content_hash: string }[];
    const chunks = (db.prepare('SELECT count(*) AS n FROM chunks').get() as { n: number }).n;
    // A document with no chunks, or chunks without a stored vector, would be half-indexed.
    const halfIndexed = (
      db
        .prepare(
          `SELECT count(*) AS n FROM documents d WHERE NOT EXISTS (SELECT 1 FROM chunks k WHERE k.document_id = d.id)
             OR EXISTS (SELECT 1 FROM chunks k LEFT JOIN vectors v ON v.chunk_hash = k.chunk_hash WHERE k.document_id = d.id AND v.vector IS NULL)`,
        )
        .get() as { n: number }
    ).n;
    return { docs: docsRows.map((r) => `${r.source}:${r.content_hash}`), chunks, integrity, halfIndexed };
  } finally {
    db.close();
  }
}

describe('killing an ingest mid-run', () => {
  it('leaves a consistent store after SIGKILL at several points, and the next run completes it', async () => {
    const referenceDir = path.join(work, 'reference');
    ingestOnce(referenceDir);
    const reference = state(referenceDir);
    expect(reference.docs).toHaveLength(120);

    let killedMidway = 0;
    for (const delayMs of [150, 400, 700, 1000, 1400]) {
      const dataDir = path.join(work, `killed-${delayMs}`);
      const child = spawn(process.execPath, [CLI, 'ingest', docs, '--collection', 'c', '--json'], { env: env(dataDir), stdio: 'ignore' });
      // Listened for from the start: a whole ingest can finish before the last kill point (it takes about
      // 1.2-1.5 s here), and a listener attached after 'close' was emitted would wait forever.
      const closed = new Promise((r) => child.once('close', r));
      await new Promise((r) => setTimeout(r, delayMs));
      const finishedBefore = child.exitCode !== null;
      child.kill('SIGKILL');
      await closed;
      let s;
      try {
        s = state(dataDir);
      } catch {
        continue; // killed before the database file existed: nothing to check
      }
      expect(s.integrity, `integrity after kill at ${delayMs} ms`).toBe('ok');
      expect(s.halfIndexed, `half-indexed documents after kill at ${delayMs} ms`).toBe(0);
      if (!finishedBefore && s.docs.length > 0 && s.docs.length < 120) killedMidway++;
      // Search works on what is there.
      const search = spawnSync(process.execPath, ['-e', `
        import('${path.join(ROOT, 'dist', 'runtime.js')}').then(async ({ createRuntime }) => {
          const { loadConfig } = await import('${path.join(ROOT, 'dist', 'config', 'index.js')}');
          const { silentLogger } = await import('${path.join(ROOT, 'dist', 'logger.js')}');
          const rt = await createRuntime(loadConfig({ env: { SOURCEBOUND_DATA_DIR: '${dataDir}', SOURCEBOUND_EMBEDDER: 'hashing' } }), silentLogger());
          const hits = rt.repo.getCollection('c') ? await rt.retriever.search({ query: 'luggage policy', collection: 'c', k: 5, mode: 'hybrid' }) : [];
          console.log(hits.length); rt.close();
        });`], { encoding: 'utf8' });
      expect(search.status, search.stderr).toBe(0);
      // The next run finishes the work and ends where an uninterrupted run ends.
      const again = ingestOnce(dataDir);
      expect(again.documents.failed).toBe(0);
      const after = state(dataDir);
      expect(after.docs).toEqual(reference.docs);
      expect(after.chunks).toBe(reference.chunks);
      expect(after.integrity).toBe('ok');
    }
    // At least one kill landed in the middle of the run (otherwise the timings above need adjusting).
    expect(killedMidway).toBeGreaterThan(0);
  }, 180_000);
});
