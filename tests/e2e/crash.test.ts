import { spawn } from 'node:child_process';
import { existsSync, mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { collect, hasExited, runSync, waitFor, waitForExit } from '../fixtures/wait.js';

// Crash tests in SQLite's manner: a real `sourcebound ingest` process is killed with SIGKILL at several
// points of its run (chosen by what it has stored, never by elapsed time); after each kill the database
// passes an integrity check, every document is either fully indexed or absent, search works, and the next
// run ends in the same state as an uninterrupted run.

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
const dbFile = (dataDir: string) => path.join(dataDir, 'sourcebound.db');

function ingestOnce(dataDir: string): { documents: Record<string, number> } {
  const r = runSync(process.execPath, [CLI, 'ingest', docs, '--collection', 'c', '--json'], { env: env(dataDir), what: `sourcebound ingest into ${dataDir}` });
  if (r.status !== 0) throw new Error(r.stderr);
  return JSON.parse(r.stdout) as { documents: Record<string, number> };
}

interface State {
  docs: string[];
  chunks: number;
  integrity: string;
  halfIndexed: number;
}

/** The store as the next process finds it; null when the kill came before the database file was created. */
function state(dataDir: string): State | null {
  if (!existsSync(dbFile(dataDir))) return null;
  // Opened read-write, as the next process opens it: after a kill mid-write the WAL must be recovered
  // (its index rebuilt), which a read-only connection cannot do ("attempt to write a readonly
  // database"). Recovery replays committed frames only, so what this sees is what the next run sees.
  const db = new Database(dbFile(dataDir), { fileMustExist: true });
  try {
    const integrity = db.pragma('integrity_check', { simple: true }) as string;
    // Killed before the first migration committed: the schema is created in one transaction, so it is
    // either all there or not at all, and an empty file holds no documents.
    if (!db.prepare("SELECT 1 FROM sqlite_master WHERE type = 'table' AND name = 'documents'").get()) {
      return { docs: [], chunks: 0, integrity, halfIndexed: 0 };
    }
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

/** One look at the running ingest's database; throws while the file or its tables do not exist yet. */
function peek<T>(dataDir: string, read: (db: Database.Database) => T): T {
  // Opened read-write, as the next process opens it: after a kill mid-write the WAL must be recovered
  // (its index rebuilt), which a read-only connection cannot do ("attempt to write a readonly
  // database"). Recovery replays committed frames only, so what this sees is what the next run sees.
  const db = new Database(dbFile(dataDir), { fileMustExist: true });
  try {
    return read(db);
  } finally {
    db.close();
  }
}
const count = (db: Database.Database, sql: string): number => (db.prepare(sql).get() as { n: number }).n;
const storedDocuments = (db: Database.Database) => count(db, 'SELECT count(*) AS n FROM documents');

// Kill points chosen by what the ingest has done, watched through its database, so each lands at a known
// stage on any machine: start-up (schema being created), the job recorded, the first document, half of them,
// and all of them (the kill then lands in the vector index save or the job's close, or finds the run over).
const KILL_POINTS: { label: string; reached: (dataDir: string) => boolean }[] = [
  { label: 'database file created', reached: (d) => existsSync(dbFile(d)) },
  { label: 'ingest job running', reached: (d) => peek(d, (db) => count(db, "SELECT count(*) AS n FROM jobs WHERE state = 'running'") > 0) },
  { label: 'first document stored', reached: (d) => peek(d, (db) => storedDocuments(db) >= 1) },
  { label: 'half the documents stored', reached: (d) => peek(d, (db) => storedDocuments(db) >= 60) },
  { label: 'every document stored', reached: (d) => peek(d, (db) => storedDocuments(db) >= 120) },
];

describe('killing an ingest mid-run', () => {
  it('leaves a consistent store after SIGKILL at several points, and the next run completes it', async () => {
    const referenceDir = path.join(work, 'reference');
    ingestOnce(referenceDir);
    const reference = state(referenceDir)!;
    expect(reference.docs).toHaveLength(120);

    const midway: string[] = [];
    for (const point of KILL_POINTS) {
      const at = `after kill at "${point.label}"`;
      const dataDir = path.join(work, point.label.replace(/\W+/g, '-'));
      const child = spawn(process.execPath, [CLI, 'ingest', docs, '--collection', 'c', '--json'], { env: env(dataDir), stdio: ['ignore', 'pipe', 'pipe'] });
      const output = collect(child);
      // The point, or the end of the run if it came first (a fast run may finish before "every document stored"
      // is seen); checked in that order so an exit is never waited for after it happened.
      const outcome = await waitFor(() => (hasExited(child) ? 'exited' : point.reached(dataDir) ? 'reached' : null), {
        what: `the ingest to reach "${point.label}"`,
        timeoutMs: 60_000,
        retryOnError: true,
        detail: () => output.output(),
      });
      if (outcome === 'reached') child.kill('SIGKILL');
      const exit = await waitForExit(child, { timeoutMs: 30_000, what: `the ingest to exit (${outcome === 'reached' ? 'SIGKILL sent' : 'ended by itself'}) at "${point.label}"` });
      const killed = exit.signal === 'SIGKILL';
      if (!killed) expect(exit.code, `the ingest ended by itself before "${point.label}": ${output.output()}`).toBe(0);
      const s = state(dataDir);
      if (s) {
        expect(s.integrity, `integrity ${at}`).toBe('ok');
        expect(s.halfIndexed, `half-indexed documents ${at}`).toBe(0);
        if (killed && s.docs.length > 0 && s.docs.length < 120) midway.push(point.label);
        // Search works on what is there.
        const search = runSync(process.execPath, ['-e', `
          import('${path.join(ROOT, 'dist', 'runtime.js')}').then(async ({ createRuntime }) => {
            const { loadConfig } = await import('${path.join(ROOT, 'dist', 'config', 'index.js')}');
            const { silentLogger } = await import('${path.join(ROOT, 'dist', 'logger.js')}');
            const rt = await createRuntime(loadConfig({ env: { SOURCEBOUND_DATA_DIR: '${dataDir}', SOURCEBOUND_EMBEDDER: 'hashing' } }), silentLogger());
            const hits = rt.repo.getCollection('c') ? await rt.retriever.search({ query: 'luggage policy', collection: 'c', k: 5, mode: 'hybrid' }) : [];
            console.log(hits.length); rt.close();
          });`], { what: `a search ${at}` });
        expect(search.status, search.stderr).toBe(0);
      }
      // The next run finishes the work and ends where an uninterrupted run ends.
      const again = ingestOnce(dataDir);
      expect(again.documents.failed, at).toBe(0);
      const after = state(dataDir)!;
      expect(after.docs, at).toEqual(reference.docs);
      expect(after.chunks, at).toBe(reference.chunks);
      expect(after.integrity, at).toBe('ok');
      // And `sourcebound check` finds the store sound: integrity, index files against the database, no orphans.
      const checked = runSync(process.execPath, [CLI, 'check'], { env: env(dataDir), what: `sourcebound check ${at}` });
      expect(checked.status, `${at}: ${checked.stdout}${checked.stderr}`).toBe(0);
    }
    // The first-document and half-way points are seen while documents are still being stored, so those kills
    // land mid-run on any machine; if they did not, the kill points above no longer test a crash mid-run.
    expect(midway, 'kill points that landed with some but not all documents stored').toEqual(
      expect.arrayContaining(['first document stored', 'half the documents stored']),
    );
  }, 180_000);
});
