import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import Database from 'better-sqlite3';
import { migrate, MIGRATIONS, openStore, runMigration, SqliteStore } from '../../src/store/index.js';
import { mulberry32 as rng } from '../fixtures/random.js';

// The document and chunk counts of each collection are kept in its row by every write (migration 8) instead
// of being counted per request; they must equal what COUNT(*) finds after any sequence of writes.

describe('maintained collection counts', () => {
  let store: SqliteStore;
  beforeEach(() => {
    store = openStore(':memory:');
  });
  afterEach(() => store.close());

  const counted = (c: string) => ({
    documents: store.db.prepare('SELECT count(*) FROM documents WHERE collection = ?').pluck().get(c) as number,
    chunks: store.db.prepare('SELECT count(*) FROM chunks k JOIN documents d ON d.id = k.document_id WHERE d.collection = ?').pluck().get(c) as number,
  });
  const metadataRows = () => store.db.prepare('SELECT document_id, collection, key, value FROM document_metadata ORDER BY 1, 3').all();
  const metadataExpected = () =>
    store.db
      .prepare("SELECT d.id AS document_id, d.collection, j.key, j.value FROM documents d, json_each(d.metadata) j WHERE j.type = 'text' ORDER BY 1, 3")
      .all();

  it('equal COUNT(*) after a seeded random sequence of adds, updates, deletions and moves, and so do the metadata rows', () => {
    const rand = rng(7);
    const collections = ['fares', 'refunds', '~rebuild:fares'];
    for (const c of collections) store.ensureCollection(c);
    const docs = new Map<string, string>(); // id -> collection
    const write = (id: string, collection: string) => {
      const n = Math.floor(rand() * 6); // a document of no chunks happens too
      const chunks = Array.from({ length: n }, (_, i) => ({
        ordinal: i, text: `chunk ${i} of ${id}`, start: 0, end: 1, headingPath: [], pageStart: null, pageEnd: null, tokenCount: 3, chunkHash: `${id}-${i}-${rand()}`,
      }));
      const metadata: Record<string, string> = { zone: String(Math.floor(rand() * 3)) };
      if (rand() < 0.5) metadata.version = `Issue ${Math.floor(rand() * 4)}`;
      store.replaceDocument(
        { id, collection, source: `${id}.md`, root: null, title: id, format: 'markdown', contentHash: id, byteSize: 1, pageCount: null, effectiveDate: null, metadata, text: 'x', settingsKey: 's' },
        chunks,
        new Map(),
        'emb',
      );
      docs.set(id, collection);
    };
    for (let step = 0; step < 400; step++) {
      const r = rand();
      const existing = [...docs.keys()];
      const pick = existing[Math.floor(rand() * existing.length)];
      if (r < 0.4 || !pick) write(`doc${step}`, collections[Math.floor(rand() * collections.length)]!);
      else if (r < 0.65) write(pick, docs.get(pick)!);
      else if (r < 0.85) {
        store.deleteDocument(pick);
        docs.delete(pick);
      } else {
        const to = collections[Math.floor(rand() * collections.length)]!;
        const id = `moved${step}`;
        store.moveDocument(pick, { id, collection: to, source: `${id}.md`, root: null });
        docs.delete(pick);
        docs.set(id, to);
      }
      if (step % 50 === 49) for (const c of collections) expect(store.getCollection(c), `${c} after step ${step}`).toMatchObject(counted(c));
    }
    for (const c of collections) expect(store.getCollection(c)).toMatchObject(counted(c));
    expect(store.listCollections().map((c) => ({ name: c.name, documents: c.documents, chunks: c.chunks }))).toEqual(
      ['fares', 'refunds'].map((name) => ({ name, ...counted(name) })),
    );
    expect(store.countDocuments()).toBe(docs.size);
    expect(store.countDocuments('refunds')).toBe(counted('refunds').documents);
    expect(metadataRows()).toEqual(metadataExpected());
  });

  it('are filled by the migration from what a schema-6 store holds, with the metadata rows of text values only', () => {
    const db = new Database(':memory:');
    db.pragma('foreign_keys = ON');
    for (let v = 0; v < 6; v++) runMigration(db, MIGRATIONS[v]!);
    db.pragma('user_version = 6');
    const t = '2026-01-01T00:00:00.000Z';
    db.prepare('INSERT INTO collections (name, created_at) VALUES (?, ?), (?, ?)').run('fares', t, 'empty', t);
    const doc = db.prepare(`INSERT INTO documents (id, collection, source, title, format, content_hash, byte_size, metadata, text, settings_key, created_at, updated_at)
      VALUES (?, 'fares', ?, 't', 'text', 'h', 1, ?, 'x', 's', ?, ?)`);
    doc.run('a', 'a.txt', JSON.stringify({ zone: '2', pages: 4 }), t, t);
    doc.run('b', 'b.txt', '{}', t, t);
    const chunk = db.prepare("INSERT INTO chunks (document_id, ordinal, text, start_offset, end_offset, token_count, chunk_hash) VALUES (?, ?, 'x', 0, 1, 1, 'h')");
    for (let i = 0; i < 3; i++) chunk.run('a', i);
    chunk.run('b', 0);
    expect(migrate(db)).toBe(MIGRATIONS.length);
    const s = new SqliteStore(db);
    try {
      expect(s.getCollection('fares')).toMatchObject({ documents: 2, chunks: 4 });
      expect(s.getCollection('empty')).toMatchObject({ documents: 0, chunks: 0 });
      // The number 4 is not text: json_extract gave 4, never equal to a filter's string, so it is not kept.
      expect(db.prepare('SELECT document_id, key, value FROM document_metadata').all()).toEqual([{ document_id: 'a', key: 'zone', value: '2' }]);
      expect([...s.chunkIdsMatching('fares', { metadata: { zone: '2' } })].sort()).toEqual([1, 2, 3]);
    } finally {
      s.close();
    }
  });
});
