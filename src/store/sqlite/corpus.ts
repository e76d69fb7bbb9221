// Collections, their source folders and documents in SQLite: the write side of the corpus. A document and all
// its chunks, lexical rows and vectors are written in one transaction.

import { ftsColumns } from '../fts-columns.js';
import { isShadowCollection, type CollectionRow, type CollectionState, type CollectionStore, type DocumentKey, type DocumentRecord, type DocumentStore } from '../types.js';
import type { Db } from './db.js';
import { vectorToBlob } from './vector-blob.js';
import { documentFromRow } from '../document-row.js';

const now = (): string => new Date().toISOString();

/**
 * Statements prepared on first use, so that a store opened on an older schema (a migration test reading it
 * before `migrate`) can still use what that schema has.
 */
function lazy<T extends Record<string, () => unknown>>(defs: T): { [K in keyof T]: ReturnType<T[K]> } {
  const out = {} as { [K in keyof T]: ReturnType<T[K]> };
  for (const [k, make] of Object.entries(defs)) {
    let v: unknown;
    Object.defineProperty(out, k, { get: () => (v ??= make()) });
  }
  return out;
}

const SIGNATURE_SQL =
  "SELECT coalesce(group_concat(name || char(31) || generation, char(30)), '') FROM (SELECT name, generation FROM collections ORDER BY name)";

/** The change signature as read on any connection (the lexical snapshot reads it inside its own transaction). */
export function readChangeSignature(conn: Db): string {
  return conn.prepare(SIGNATURE_SQL).pluck().get() as string;
}

export function sqliteCollections(db: Db): CollectionStore {
  const st = lazy({
    ensure: () => db.prepare('INSERT INTO collections (name, created_at) VALUES (?, ?) ON CONFLICT(name) DO NOTHING'),
    // The counts are kept in the row by every write (migration 8), not counted here.
    get: () => db.prepare(`
      SELECT name, embedder_id AS embedderId, dimensions, generation, document_count AS documents, chunk_count AS chunks
      FROM collections WHERE name = ?`),
    state: () => db.prepare('SELECT name, embedder_id AS embedderId, dimensions, generation FROM collections WHERE name = ?'),
    // Shadow collections of a running full re-index are not collections anyone asked for.
    list: () => db.prepare(`
      SELECT name, embedder_id AS embedderId, dimensions, generation, document_count AS documents, chunk_count AS chunks
      FROM collections WHERE substr(name, 1, 9) <> '~rebuild:' ORDER BY name`),
    setEmbedder: () => db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ? WHERE name = ?'),
    bump: () => db.prepare('UPDATE collections SET generation = generation + 1 WHERE name = ? RETURNING generation'),
    setState: () => db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ?, generation = ? WHERE name = ?'),
    drop: () => db.prepare('DELETE FROM collections WHERE name = ?'),
    signature: () => db.prepare(SIGNATURE_SQL).pluck(),
    addSource: () => db.prepare('INSERT INTO sources (collection, root, added_at) VALUES (?, ?, ?) ON CONFLICT DO NOTHING'),
    listSources: () => db.prepare('SELECT collection, root FROM sources ORDER BY collection, root'),
    listSourcesOf: () => db.prepare('SELECT collection, root FROM sources WHERE collection = ? ORDER BY root'),
  });
  const collections: CollectionStore = {
    ensureCollection(name) {
      st.ensure.run(name, now());
    },
    getCollection(name) {
      return (st.get.get(name) as CollectionRow | undefined) ?? null;
    },
    collectionState(name) {
      return (st.state.get(name) as CollectionState | undefined) ?? null;
    },
    listCollections() {
      return st.list.all() as CollectionRow[];
    },
    setCollectionEmbedder(name, embedderId, dimensions) {
      st.setEmbedder.run(embedderId, dimensions, name);
    },
    bumpGeneration(name) {
      return (st.bump.get(name) as { generation: number } | undefined)?.generation ?? 0;
    },
    setCollectionState(name, state) {
      st.setState.run(state.embedderId, state.dimensions, state.generation, name);
    },
    dropCollection(name) {
      st.drop.run(name);
    },
    changeSignature() {
      return st.signature.get() as string;
    },
    addSourceRoot(collection, root) {
      st.addSource.run(collection, root, now());
    },
    listSourceRoots(collection) {
      return (collection ? st.listSourcesOf.all(collection) : st.listSources.all()) as { collection: string; root: string }[];
    },
  };
  return collections;
}

const toDoc = (r: Record<string, unknown>): DocumentRecord => documentFromRow(r, JSON.parse((r.metadata as string) || '{}') as Record<string, string>);

export function sqliteDocuments(db: Db, bumpGeneration: (collection: string) => number): DocumentStore {
  const st = lazy({
    bySource: () => db.prepare('SELECT * FROM documents WHERE collection = ? AND source = ?'),
    byId: () => db.prepare('SELECT * FROM documents WHERE id = ?'),
    text: () => db.prepare('SELECT text FROM documents WHERE id = ?'),
    byContent: () => db.prepare('SELECT id, source FROM documents WHERE collection = ? AND content_hash = ? LIMIT 1'),
    of: () => db.prepare('SELECT * FROM documents WHERE collection = ? ORDER BY source'),
    count: () => db.prepare('SELECT coalesce(sum(document_count), 0) AS n FROM collections'),
    countOf: () => db.prepare('SELECT coalesce(sum(document_count), 0) AS n FROM collections WHERE name = ?'),
    // Every change to a collection's documents or chunks moves its counts in the same transaction.
    addCounts: () => db.prepare('UPDATE collections SET document_count = document_count + ?, chunk_count = chunk_count + ? WHERE name = ?'),
    collectionOf: () => db.prepare('SELECT collection FROM documents WHERE id = ?').pluck(),
    deleteMeta: () => db.prepare('DELETE FROM document_metadata WHERE document_id = ?'),
    insertMeta: () => db.prepare('INSERT INTO document_metadata (document_id, collection, key, value) VALUES (?, ?, ?, ?)'),
    copyMeta: () => db.prepare('INSERT INTO document_metadata (document_id, collection, key, value) SELECT ?, ?, key, value FROM document_metadata WHERE document_id = ?'),
    keys: () => db.prepare(`
      SELECT id, source, root, content_hash AS contentHash, settings_key AS settingsKey, updated_at AS updatedAt
      FROM documents WHERE collection = ? ORDER BY source`),
    chunkIdsOf: () => db.prepare('SELECT id FROM chunks WHERE document_id = ?'),
    deleteFts: () => db.prepare('DELETE FROM chunks_fts WHERE rowid = ?'),
    deleteChunksOf: () => db.prepare('DELETE FROM chunks WHERE document_id = ?'),
    delete: () => db.prepare('DELETE FROM documents WHERE id = ?'),
    upsert: () => db.prepare(`
      INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, updated_at)
      VALUES (@id, @collection, @source, @root, @title, @format, @contentHash, @byteSize, @pageCount,
        @effectiveDate, @metadata, @text, @settingsKey, @now, @now)
      ON CONFLICT(id) DO UPDATE SET source = excluded.source, root = excluded.root, title = excluded.title,
        format = excluded.format, content_hash = excluded.content_hash, byte_size = excluded.byte_size,
        page_count = excluded.page_count, effective_date = excluded.effective_date, metadata = excluded.metadata,
        text = excluded.text, settings_key = excluded.settings_key, updated_at = excluded.updated_at`),
    insertChunk: () => db.prepare(`
      INSERT INTO chunks (document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end,
        page_breaks, token_count, chunk_hash)
      VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`),
    insertFts: () => db.prepare('INSERT INTO chunks_fts (rowid, title, heading, body) VALUES (?, ?, ?, ?)'),
    insertVector: () => db.prepare('INSERT INTO vectors (model_id, chunk_hash, dimensions, vector) VALUES (?, ?, ?, ?) ON CONFLICT DO NOTHING'),
    copy: () => db.prepare(`
      INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, updated_at)
      SELECT @id, @collection, @source, @root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, @now
      FROM documents WHERE id = @fromId`),
    moveChunks: () => db.prepare('UPDATE chunks SET document_id = ? WHERE document_id = ?'),
    ftsSourceOf: () => db.prepare('SELECT id, heading_path AS headingPath, text FROM chunks WHERE document_id = ? ORDER BY id'),
  });

  // Documents of a shadow collection (a full re-index in progress) get no FTS rows until they are swapped in:
  // every query's BM25 runs over the one FTS table, and a second copy of a collection in it made queries
  // 2-3x slower for as long as a full re-index ran (docs/benchmarks.md, "Re-index").
  const removeChunksOf = (docId: string, collection: string): number[] => {
    const ids = (st.chunkIdsOf.all(docId) as { id: number }[]).map((r) => r.id);
    if (!isShadowCollection(collection)) for (const id of ids) st.deleteFts.run(id);
    st.deleteChunksOf.run(docId);
    return ids;
  };
  const insertFts = (id: number, title: string, headingPath: readonly string[], text: string): void => {
    const cols = ftsColumns(title, headingPath, text);
    st.insertFts.run(id, cols.title, cols.heading, cols.body);
  };

  return {
    getDocumentBySource(collection, source) {
      const r = st.bySource.get(collection, source) as Record<string, unknown> | undefined;
      return r ? toDoc(r) : null;
    },
    getDocument(id) {
      const r = st.byId.get(id) as Record<string, unknown> | undefined;
      return r ? toDoc(r) : null;
    },
    getDocumentText(id) {
      return (st.text.get(id) as { text: string } | undefined)?.text ?? null;
    },
    findDocumentByContent(collection, contentHash) {
      return (st.byContent.get(collection, contentHash) as { id: string; source: string } | undefined) ?? null;
    },
    listDocuments(collection) {
      return (st.of.all(collection) as Record<string, unknown>[]).map(toDoc);
    },
    countDocuments(collection) {
      return ((collection ? st.countOf.get(collection) : st.count.get()) as { n: number }).n;
    },
    documentKeys(collection) {
      return st.keys.all(collection) as DocumentKey[];
    },
    replaceDocument(doc, chunks, vectors, modelId) {
      return db
        .transaction(() => {
          const was = st.collectionOf.get(doc.id) as string | undefined;
          const removedChunkIds = removeChunksOf(doc.id, doc.collection);
          if (was !== undefined) st.addCounts.run(-1, -removedChunkIds.length, was);
          st.upsert.run({ ...doc, metadata: JSON.stringify(doc.metadata), now: now() });
          st.deleteMeta.run(doc.id);
          for (const [key, value] of Object.entries(doc.metadata)) {
            if (typeof value === 'string') st.insertMeta.run(doc.id, doc.collection, key, value);
          }
          st.addCounts.run(1, chunks.length, doc.collection);
          const chunkIds: number[] = [];
          for (const c of chunks) {
            const pageBreaks = c.pageBreaks && c.pageBreaks.length > 0 ? JSON.stringify(c.pageBreaks.map((b) => [b.at, b.page])) : null;
            const id = Number(
              st.insertChunk.run(doc.id, c.ordinal, c.text, c.start, c.end, JSON.stringify(c.headingPath), c.pageStart, c.pageEnd, pageBreaks, c.tokenCount, c.chunkHash)
                .lastInsertRowid,
            );
            chunkIds.push(id);
            if (!isShadowCollection(doc.collection)) insertFts(id, doc.title, c.headingPath, c.text);
            const v = vectors.get(c.chunkHash);
            if (v) st.insertVector.run(modelId, c.chunkHash, v.length, vectorToBlob(v));
          }
          const generation = bumpGeneration(doc.collection);
          return { removedChunkIds, chunkIds, generation };
        })
        .immediate();
    },
    deleteDocument(id) {
      return db
        .transaction(() => {
          const d = st.byId.get(id) as { collection: string } | undefined;
          if (!d) return [];
          const removed = removeChunksOf(id, d.collection);
          st.delete.run(id);
          st.addCounts.run(-1, -removed.length, d.collection);
          bumpGeneration(d.collection);
          return removed;
        })
        .immediate();
    },
    moveDocument(fromId, to) {
      return db
        .transaction(() => {
          if (fromId === to.id) throw new Error(`moveDocument: ${fromId} onto itself`);
          // A copy under the new id first, then the chunks, then the old row: no moment where the foreign key
          // of a chunk points nowhere, and the chunk rows (ids, hashes, FTS rows) stay as they were.
          const from = st.byId.get(fromId) as { collection: string; title: string } | undefined;
          if (!from) throw new Error(`moveDocument: no document ${fromId}`);
          st.copy.run({ ...to, fromId, now: now() });
          st.copyMeta.run(to.id, to.collection, fromId);
          const moved = st.moveChunks.run(to.id, fromId).changes;
          st.delete.run(fromId);
          st.addCounts.run(-1, -moved, from.collection);
          st.addCounts.run(1, moved, to.collection);
          if (isShadowCollection(from.collection) && !isShadowCollection(to.collection)) {
            for (const c of st.ftsSourceOf.all(to.id) as { id: number; headingPath: string; text: string }[]) {
              insertFts(c.id, from.title, JSON.parse(c.headingPath) as string[], c.text);
            }
          }
          return moved;
        })
        .immediate();
    },
    transaction(fn) {
      return db.transaction(fn).immediate();
    },
  };
}
