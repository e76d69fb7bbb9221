// Page breaks inside chunks: written and read back, and absent (not an error) in a store written
// before they were recorded.
import Database from 'better-sqlite3';
import { describe, expect, it } from 'vitest';
import { MIGRATIONS, migrate, openDatabase, runMigration, SqliteStore } from '../../src/store/index.js';

const DOC = {
  collection: 'c',
  source: 'rules.pdf',
  root: null,
  title: 'Rules',
  format: 'pdf',
  contentHash: 'h',
  byteSize: 1,
  pageCount: 2,
  effectiveDate: null,
  metadata: {},
  text: 'Gates open at dawn. Keys go back to the warden.',
  settingsKey: 's',
};

describe('chunk page breaks in the store', () => {
  it('reads back the page breaks a chunk was written with, and none for a chunk on one page', () => {
    const repo = new SqliteStore(openDatabase(':memory:'));
    repo.ensureCollection('c');
    const { chunkIds } = repo.replaceDocument(
      { ...DOC, id: 'd1' },
      [
        { ordinal: 0, text: DOC.text, start: 0, end: 47, headingPath: [], pageStart: 1, pageEnd: 2, pageBreaks: [{ at: 20, page: 2 }], tokenCount: 9, chunkHash: 'a' },
        { ordinal: 1, text: 'Keys', start: 20, end: 24, headingPath: [], pageStart: 2, pageEnd: 2, pageBreaks: [], tokenCount: 1, chunkHash: 'b' },
      ],
      new Map(),
      'm',
    );
    const views = repo.chunkViews(chunkIds);
    expect(views.get(chunkIds[0]!)).toMatchObject({ pageStart: 1, pageEnd: 2, pageBreaks: [{ at: 20, page: 2 }] });
    expect(views.get(chunkIds[1]!)).toMatchObject({ pageStart: 2, pageEnd: 2, pageBreaks: [] });
  });

  it('opens a store written before page breaks were recorded, keeping its chunks and their start pages', () => {
    const db = new Database(':memory:');
    // The schema as it stood before the page-break migration, with a chunk written then.
    MIGRATIONS.slice(0, 3).forEach((m, i) => {
      runMigration(db, m);
      db.pragma(`user_version = ${i + 1}`);
    });
    db.prepare("INSERT INTO collections (name, created_at) VALUES ('c', 'now')").run();
    db.prepare(
      `INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count, metadata, text, settings_key, created_at, updated_at)
       VALUES ('d1', 'c', 'rules.pdf', NULL, 'Rules', 'pdf', 'h', 1, 2, '{}', ?, 's', 'now', 'now')`,
    ).run(DOC.text);
    const id = Number(
      db.prepare(
        `INSERT INTO chunks (document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end, token_count, chunk_hash)
         VALUES ('d1', 0, ?, 0, 47, '[]', 1, 2, 9, 'a')`,
      ).run(DOC.text).lastInsertRowid,
    );
    expect(migrate(db)).toBe(MIGRATIONS.length);
    expect(db.prepare('SELECT page_breaks FROM chunks WHERE id = ?').pluck().get(id)).toBeNull();
    const view = new SqliteStore(db).chunkViews([id]).get(id);
    expect(view).toMatchObject({ pageStart: 1, pageEnd: 2, pageBreaks: [], text: DOC.text });
  });
});
