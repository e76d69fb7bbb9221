import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { createLexicalMemory } from '../../src/retrieve/lexical-memory.js';
import { phraseCounts, toWeightedMatch, type WeightedTerm } from '../../src/retrieve/query-text.js';
import { ftsColumns, MIGRATIONS, migrate, openStore, runMigration, SqliteStore, type FtsWeights } from '../../src/store/index.js';
import { mulberry32 } from '../fixtures/random.js';

// A store written before the lexical index kept its statistics right (schema version 5: a contentless FTS5 table
// with contentless_delete=1) and changed in place many times: opening it migrates the index so that both engines
// rank exactly as a fresh store of the same documents (BM25 after Robertson and Zaragoza 2009 and FTS5's bm25()
// documentation: the row count N and mean row length are part of every score).

const WORDS = ['tram', 'ferry', 'depot', 'refund', 'refunds', 'ticket', 'timetable', 'harbour', 'platform', 'driver', 'shift', 'night',
  'fare', 'zone', 'pass', 'passes', 'bicycle', 'ramp', 'route', 'fault', 'Quarrel', 'Tollbridge', 'the', 'and', 'of'];

type Doc = { id: string; collection: string; title: string; chunks: { heading: string[]; text: string }[] };

function generateDoc(rand: () => number, id: string, collection: string): Doc {
  const words = (n: number): string => Array.from({ length: n }, () => WORDS[Math.floor(Math.pow(rand(), 1.5) * WORDS.length)]!).join(' ');
  const title = `Notice ${id} ${words(2)}`;
  return {
    id,
    collection,
    title,
    chunks: Array.from({ length: 1 + Math.floor(rand() * 3) }, () => {
      const heading = rand() < 0.5 ? [title, words(2)] : [title];
      const body = words(5 + Math.floor(rand() * 30));
      return { heading, text: rand() < 0.5 ? `${heading[heading.length - 1]}\n${body}` : body };
    }),
  };
}

/** Writes a document the way the schema-5 store did: its chunks, then one contentless FTS row per chunk. */
function writeOld(db: Database.Database, d: Doc): void {
  db.prepare(
    `INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count, metadata, text, settings_key, created_at, updated_at)
     VALUES (?, ?, ?, NULL, ?, 'text', ?, 1, NULL, '{}', '', 's', 'now', 'now')`,
  ).run(d.id, d.collection, `${d.id}.txt`, d.title, d.id);
  d.chunks.forEach((c, i) => {
    const id = Number(
      db.prepare(
        `INSERT INTO chunks (document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end, token_count, chunk_hash)
         VALUES (?, ?, ?, 0, 1, ?, NULL, NULL, 1, ?)`,
      ).run(d.id, i, c.text, JSON.stringify(c.heading), `${d.id}-${i}`).lastInsertRowid,
    );
    // A shadow collection's chunks had no FTS rows until the swap.
    if (d.collection.startsWith('~rebuild:')) return;
    const cols = ftsColumns(d.title, c.heading, c.text);
    db.prepare('INSERT INTO chunks_fts (rowid, title, heading, body) VALUES (?, ?, ?, ?)').run(id, cols.title, cols.heading, cols.body);
  });
}

/** Deletes a document the way the schema-5 store did: its FTS rows, then its rows. */
function deleteOld(db: Database.Database, id: string): void {
  for (const k of db.prepare('SELECT id FROM chunks WHERE document_id = ?').pluck().all(id) as number[]) db.prepare('DELETE FROM chunks_fts WHERE rowid = ?').run(k);
  db.prepare('DELETE FROM chunks WHERE document_id = ?').run(id);
  db.prepare('DELETE FROM documents WHERE id = ?').run(id);
}

const WEIGHTS: FtsWeights = { title: 2, heading: 1, body: 1 };

/** Each query's hits from both engines, chunks named by (document, ordinal), with the statistics BM25 reads. */
function rankings(store: SqliteStore, queries: readonly WeightedTerm[][]): unknown {
  const keys = new Map(
    (store.db.prepare('SELECT id, document_id, ordinal FROM chunks').raw().all() as [number, string, number][]).map(([id, doc, ord]) => [id, `${doc}#${ord}`]),
  );
  // Scores to 1e-9 relative (twelve significant digits here), ties in a stable order.
  const named = (hits: readonly { chunkId: number; score: number }[]): string[] =>
    hits.map((h) => `${keys.get(h.chunkId)} ${h.score.toPrecision(12)}`).sort((a, b) => Number(b.split(' ')[1]) - Number(a.split(' ')[1]) || a.localeCompare(b));
  const mem = createLexicalMemory(store);
  const snap = store.lexicalSnapshot();
  try {
    return {
      rows: snap.rows,
      tokens: snap.tokens,
      fts5: queries.map((q) => named(store.searchFts('c', toWeightedMatch(q, { maxRepeat: 6 })!, 1000, WEIGHTS))),
      memory: queries.map((q) => named(mem.search('c', phraseCounts(q, { maxRepeat: 6 }), 1000, WEIGHTS)!)),
    };
  } finally {
    snap.release();
    mem.close();
  }
}

describe('migrating the lexical index of a schema-5 store', () => {
  it('counts only the rows present and ranks as a fresh store of the same documents, shadow chunks left out', () => {
    const rand = mulberry32(41);
    const db = new Database(':memory:');
    MIGRATIONS.slice(0, 5).forEach((m, i) => {
      runMigration(db, m);
      db.pragma(`user_version = ${i + 1}`);
    });
    for (const c of ['c', '~rebuild:c']) db.prepare('INSERT INTO collections (name, created_at) VALUES (?, ?)').run(c, 'now');
    const live = new Map<string, Doc>();
    for (let i = 0; i < 60; i++) live.set(`d${i}`, generateDoc(rand, `d${i}`, 'c'));
    for (const d of live.values()) writeOld(db, d);
    // Updates (delete, then write again) and deletions, as the old store did them.
    for (let round = 0; round < 3; round++) {
      for (const id of [...live.keys()]) {
        const r = rand();
        if (r < 0.3) {
          deleteOld(db, id);
          const d = generateDoc(rand, id, 'c');
          writeOld(db, d);
          live.set(id, d);
        } else if (r < 0.4) {
          deleteOld(db, id);
          live.delete(id);
        }
      }
    }
    writeOld(db, generateDoc(rand, 'shadow1', '~rebuild:c'));
    const avgRows = (): number => db.prepare('SELECT count(*) FROM chunks k JOIN documents d ON d.id = k.document_id WHERE d.collection = ?').pluck().get('c') as number;
    const before = new SqliteStore(db).lexicalSnapshot();
    const inflated = before.rows;
    before.release();
    // The defect as the old layout had it: deleted rows still counted.
    expect(inflated).toBeGreaterThan(avgRows());

    expect(migrate(db)).toBe(MIGRATIONS.length);
    const migrated = new SqliteStore(db);
    const fresh = openStore(':memory:');
    try {
      for (const c of ['c', '~rebuild:c']) fresh.ensureCollection(c);
      for (const d of [...live.values(), generateDoc(mulberry32(1), 'shadow1', '~rebuild:c')]) {
        fresh.replaceDocument(
          { id: d.id, collection: d.collection, source: `${d.id}.txt`, root: null, title: d.title, format: 'text', contentHash: d.id, byteSize: 1, pageCount: null, effectiveDate: null, metadata: {}, text: '', settingsKey: 's' },
          d.chunks.map((c, i) => ({ ordinal: i, text: c.text, start: 0, end: 1, headingPath: c.heading, pageStart: null, pageEnd: null, tokenCount: 1, chunkHash: `${d.id}-${i}` })),
          new Map(),
          'm',
        );
      }
      const qrand = mulberry32(3);
      const queries = Array.from({ length: 30 }, () => {
        const terms = new Map<string, number>();
        for (let n = 1 + Math.floor(qrand() * 5); n > 0; n--) terms.set(WORDS[Math.floor(qrand() * WORDS.length)]!.toLowerCase(), 0.1 + qrand());
        return [...terms].map(([term, weight]) => ({ term, weight }));
      });
      const got = rankings(migrated, queries) as { rows: number };
      expect(got.rows).toBe(avgRows());
      expect(got).toEqual(rankings(fresh, queries));
      // Chunks of the shadow collection are not in the index after the migration either.
      const shadowIds = db.prepare("SELECT k.id FROM chunks k WHERE k.document_id = 'shadow1'").pluck().all() as number[];
      expect(shadowIds.length).toBeGreaterThan(0);
      for (const id of shadowIds) expect(db.prepare('SELECT count(*) FROM chunks_fts WHERE rowid = ?').pluck().get(id)).toBe(0);
      // FTS5's own check of the rebuilt index against its stored rows (sqlite.org/fts5.html, "The 'integrity-check' command").
      expect(() => db.prepare("INSERT INTO chunks_fts(chunks_fts) VALUES ('integrity-check')").run()).not.toThrow();
    } finally {
      fresh.close();
      migrated.close();
    }
  });
});
