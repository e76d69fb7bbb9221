import { spawn } from 'node:child_process';
import { cpSync, mkdirSync, mkdtempSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import Database from 'better-sqlite3';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { collect, hasExited, runSync, waitFor, waitForExit } from '../fixtures/wait.js';

// Crash tests of the nightly re-index, in SQLite's manner: a real `sourcebound reindex` process is killed with
// SIGKILL at several points of its run (watched through the database, so each kill lands at a known stage);
// after each kill the database passes `PRAGMA integrity_check`, no document is half-indexed, a full re-index
// has switched either everything or nothing, search works, and the next run ends in exactly the state of an
// uninterrupted run: the same documents, the same chunk hashes, the same search results.

const ROOT = path.resolve(import.meta.dirname, '..', '..');
const CLI = path.join(ROOT, 'dist', 'cli.js');
const TOPICS = ['night buses', 'tram platforms', 'lost property', 'bicycles', 'season tickets', 'fare capping', 'assistance dogs', 'pushchairs'];
const COUNT = 150;
const SLOW = process.env.SOURCEBOUND_SLOW === '1';
let work: string;
let docs: string;
let base: string;

const notice = (i: number, variant = ''): string => {
  const t = TOPICS[i % TOPICS.length]!;
  const paras = Array.from({ length: 10 }, (_, j) => `Clause ${i}.${j}${variant}: staff at Quarrel Lane depot dealing with ${t} on route ${i} follow step ${j} of the ${t} notice and log check ${i * 10 + j}.`);
  return `# Depot notice ${i} on ${t}\n\n${paras.join('\n\n')}\n`;
};
const name = (i: number) => `notice-${String(i).padStart(3, '0')}.md`;
const env = (dataDir: string) => ({ ...process.env, SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'warn' });

function run(dataDir: string, args: string[]): { documents: Record<string, number> } {
  const r = runSync(process.execPath, [CLI, ...args, '--json'], { env: env(dataDir), what: `sourcebound ${args.join(' ')}` });
  if (r.status !== 0) throw new Error(`${args.join(' ')}: ${r.stderr}`);
  return JSON.parse(r.stdout) as { documents: Record<string, number> };
}

beforeAll(() => {
  work = mkdtempSync(path.join(tmpdir(), 'sb-crash-reindex-'));
  docs = path.join(work, 'docs');
  mkdirSync(docs);
  for (let i = 0; i < COUNT; i++) writeFileSync(path.join(docs, name(i)), notice(i));
  base = path.join(work, 'base');
  run(base, ['ingest', docs, '--collection', 'c']);
  // What the nightly run finds: a sixth of the notices edited, a few renamed, a few deleted, a few new.
  for (let i = 0; i < COUNT; i += 6) writeFileSync(path.join(docs, name(i)), notice(i, ' (revised)'));
  for (const i of [1, 2, 3]) renameSync(path.join(docs, name(i)), path.join(docs, `moved-${name(i)}`));
  for (const i of [5, 7, 11]) rmSync(path.join(docs, name(i)));
  for (let i = COUNT; i < COUNT + 10; i++) writeFileSync(path.join(docs, name(i)), notice(i));
}, 120_000);
afterAll(() => rmSync(work, { recursive: true, force: true }));

interface State {
  integrity: string;
  docs: string[];
  chunkHashes: string[];
  halfIndexed: number;
  shadowDocs: number;
}

function state(dataDir: string): State {
  // Read-write, as the next process opens it: after a kill the WAL may need recovery, which a
  // read-only connection cannot do.
  const db = new Database(path.join(dataDir, 'sourcebound.db'));
  try {
    const integrity = db.pragma('integrity_check', { simple: true }) as string;
    const rows = db.prepare("SELECT id, source, content_hash FROM documents WHERE collection = 'c' ORDER BY source").all() as { id: string; source: string; content_hash: string }[];
    const chunkHashes = (
      db.prepare("SELECT d.source || '#' || k.ordinal || ':' || k.chunk_hash AS h FROM chunks k JOIN documents d ON d.id = k.document_id WHERE d.collection = 'c' ORDER BY d.source, k.ordinal").all() as { h: string }[]
    ).map((r) => r.h);
    const halfIndexed = (
      db
        .prepare(
          `SELECT count(*) AS n FROM documents d WHERE NOT EXISTS (SELECT 1 FROM chunks k WHERE k.document_id = d.id)
             OR EXISTS (SELECT 1 FROM chunks k LEFT JOIN vectors v ON v.chunk_hash = k.chunk_hash WHERE k.document_id = d.id AND v.vector IS NULL)`,
        )
        .get() as { n: number }
    ).n;
    const shadowDocs = (db.prepare("SELECT count(*) AS n FROM documents WHERE collection <> 'c'").get() as { n: number }).n;
    return { integrity, docs: rows.map((r) => `${r.id}:${r.source}:${r.content_hash}`), chunkHashes, halfIndexed, shadowDocs };
  } finally {
    db.close();
  }
}

/** Top hits for a few queries, in a fresh process, with the vector index size against the chunk count. */
function search(dataDir: string): { hits: string[][]; indexSize: number; chunks: number } {
  const r = runSync(
    process.execPath,
    [
      '--input-type=module',
      '-e',
      `
      const { createRuntime } = await import(${JSON.stringify(path.join(ROOT, 'dist', 'runtime.js'))});
      const { loadConfig } = await import(${JSON.stringify(path.join(ROOT, 'dist', 'config', 'index.js'))});
      const { silentLogger } = await import(${JSON.stringify(path.join(ROOT, 'dist', 'logger.js'))});
      const rt = await createRuntime(loadConfig({ env: { SOURCEBOUND_DATA_DIR: ${JSON.stringify(dataDir)}, SOURCEBOUND_EMBEDDER: 'hashing' } }), silentLogger());
      const hits = [];
      for (const query of ['revised bicycles log check 1234', 'pushchairs log check 1475', 'lost property log check 1064']) {
        for (const mode of ['lexical', 'dense', 'hybrid']) {
          hits.push((await rt.retriever.search({ query, collection: 'c', k: 3, mode })).map((h) => h.source + '#' + h.chunkHash));
        }
      }
      console.log(JSON.stringify({ hits, indexSize: rt.indexes.size('c'), chunks: rt.repo.chunksOfCollection('c').length }));
      rt.close();`,
    ],
    { what: `a search of ${dataDir}` },
  );
  if (r.status !== 0) throw new Error(r.stderr);
  return JSON.parse(r.stdout.trim().split('\n').pop()!) as { hits: string[][]; indexSize: number; chunks: number };
}

/**
 * Starts the re-index and SIGKILLs it once `ready` says so (polled on the database); returns false when the
 * run ended by itself first. Fails within a deadline, naming the kill point, if neither happens.
 */
async function killWhen(dataDir: string, args: string[], label: string, ready: (db: Database.Database) => boolean): Promise<boolean> {
  const child = spawn(process.execPath, [CLI, ...args], { env: env(dataDir), stdio: ['ignore', 'ignore', 'pipe'] });
  const output = collect(child);
  const db = new Database(path.join(dataDir, 'sourcebound.db'), { readonly: true });
  let outcome: 'exited' | 'reached';
  try {
    // The exit is checked before the condition, so a run that finished is never waited on.
    outcome = await waitFor(() => (hasExited(child) ? 'exited' : ready(db) ? 'reached' : null), {
      what: `the re-index to reach "${label}"`,
      timeoutMs: 60_000,
      intervalMs: 5,
      retryOnError: true, // the writer holds a lock for a moment
      detail: () => output.stderr(),
    });
  } finally {
    db.close();
  }
  if (outcome === 'reached') child.kill('SIGKILL');
  const exit = await waitForExit(child, { timeoutMs: 30_000, what: `the re-index to exit at "${label}"` });
  if (exit.signal === 'SIGKILL') return true;
  expect(exit.code, `the re-index ended by itself before "${label}": ${output.stderr()}`).toBe(0);
  return false;
}

const count = (db: Database.Database, sql: string): number => (db.prepare(sql).get() as { n: number }).n;
const shadow = (db: Database.Database) => count(db, "SELECT count(*) AS n FROM documents WHERE collection = '~rebuild:c'");

describe('killing a re-index mid-run', () => {
  it('leaves the store consistent at every kill point, and the next run ends as an uninterrupted one', async () => {
    const referenceDir = path.join(work, 'reference');
    cpSync(base, referenceDir, { recursive: true });
    const s = run(referenceDir, ['reindex']);
    expect(s.documents).toMatchObject({ added: 10, renamed: 3, removed: 3, failed: 0 });
    const reference = state(referenceDir);
    const referenceSearch = search(referenceDir);
    expect(referenceSearch.indexSize).toBe(referenceSearch.chunks);
    const before = state(base);

    // Incremental: after the first changed document, and halfway through the changed ones.
    // Full: as soon as the shadow has a document, at half, at three quarters, and once it holds them all
    // (build done: the kill lands in the catch-up pass, the index save or the switch). Every point is a stage
    // the run has reached, seen in its database, so the kills land at the same places on any machine.
    const changedSoFar = (db: Database.Database) =>
      count(db, "SELECT count(*) AS n FROM documents WHERE collection = 'c' AND updated_at >= (SELECT max(started_at) FROM jobs WHERE kind = 'reindex')");
    const files = COUNT - 3 + 10;
    const all: { label: string; args: string[]; ready: (db: Database.Database) => boolean }[] = [
      { label: 'incremental, first change', args: ['reindex'], ready: (db) => changedSoFar(db) >= 1 },
      { label: 'incremental, half the changes', args: ['reindex'], ready: (db) => changedSoFar(db) >= 28 },
      { label: 'full, first shadow document', args: ['reindex', '--full'], ready: (db) => shadow(db) >= 1 },
      { label: 'full, half built', args: ['reindex', '--full'], ready: (db) => shadow(db) >= files / 2 },
      { label: 'full, three quarters built', args: ['reindex', '--full'], ready: (db) => shadow(db) >= (files * 3) / 4 },
      { label: 'full, built', args: ['reindex', '--full'], ready: (db) => shadow(db) >= files },
    ];
    // Each point costs a few process start-ups: `npm test` takes one of each kind, `npm run test:slow` all.
    const points = SLOW ? all : all.filter((p) => ['incremental, half the changes', 'full, half built', 'full, built'].includes(p.label));
    let killedMidway = 0;
    for (const p of points) {
      const dataDir = path.join(work, p.label.replace(/\W+/g, '-'));
      cpSync(base, dataDir, { recursive: true });
      const killed = await killWhen(dataDir, p.args, p.label, p.ready);
      const s1 = state(dataDir);
      expect(s1.integrity, p.label).toBe('ok');
      expect(s1.halfIndexed, p.label).toBe(0);
      if (p.args.includes('--full')) {
        // All or nothing: the collection is either as it was or as the finished run leaves it.
        const whole = s1.docs.join('\n') === before.docs.join('\n') || s1.docs.join('\n') === reference.docs.join('\n');
        expect(whole, `${p.label}: the collection switched only in part`).toBe(true);
      }
      if (killed && s1.docs.join('\n') !== reference.docs.join('\n')) killedMidway++;
      // Search works on what is there, with a vector index that matches the database.
      const mid = search(dataDir);
      expect(mid.hits.every((h) => h.length > 0), p.label).toBe(true);
      expect(mid.indexSize, p.label).toBe(mid.chunks);
      // The next run (without --full: an unfinished full run is picked up by itself) completes the work.
      const again = run(dataDir, ['reindex']);
      expect(again.documents.failed, p.label).toBe(0);
      const s2 = state(dataDir);
      expect(s2.integrity, p.label).toBe('ok');
      expect(s2.shadowDocs, p.label).toBe(0);
      expect(s2.docs, p.label).toEqual(reference.docs);
      expect(s2.chunkHashes, p.label).toEqual(reference.chunkHashes);
      expect(search(dataDir), p.label).toEqual(referenceSearch);
    }
    // Most kills landed before the run had finished (otherwise the kill points above need adjusting).
    expect(killedMidway).toBeGreaterThanOrEqual(SLOW ? 4 : 2);
  }, 300_000);
});
