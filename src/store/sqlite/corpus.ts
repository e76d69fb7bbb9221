// Collections, their source folders and documents in SQLite: the write side of the corpus. A document and all
// its chunks, lexical rows and vectors are written in one transaction.

import { ftsColumns } from '../fts-columns.js';
import { isShadowCollection, type CollectionRow, type CollectionState, type CollectionStore, type DocumentKey, type DocumentRecord, type DocumentStore } from '../types.js';
import type { Db } from './db.js';
import { vectorToBlob } from './vector-blob.js';

const now = (): string => new Date().toISOString();

const SIGNATURE_SQL =
  "SELECT coalesce(group_concat(name || char(31) || generation, char(30)), '') FROM (SELECT name, generation FROM collections ORDER BY name)";

/** The change signature as read on any connection (the lexical snapshot reads it inside its own transaction). */
export function readChangeSignature(conn: Db): string {
  return conn.prepare(SIGNATURE_SQL).pluck().get() as string;
}

export function sqliteCollections(db: Db): CollectionStore {
  const st = {
    ensure: db.prepare('INSERT INTO collections (name, created_at) VALUES (?, ?) ON CONFLICT(name) DO NOTHING'),
    get: db.prepare(`
      SELECT c.name, c.embedder_id AS embedderId, c.dimensions, c.generation,
        (SELECT count(*) FROM documents d WHERE d.collection = c.name) AS documents,
        (SELECT count(*) FROM chunks k JOIN documents d ON d.id = k.document_id WHERE d.collection = c.name) AS chunks
      FROM collections c WHERE c.name = ?`),
    state: db.prepare('SELECT name, embedder_id AS embedderId, dimensions, generation FROM collections WHERE name = ?'),
    // Shadow collections of a running full re-index are not collections anyone asked for.
    list: db.prepare("SELECT name FROM collections WHERE substr(name, 1, 9) <> '~rebuild:' ORDER BY name"),
    setEmbedder: db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ? WHERE name = ?'),
    bump: db.prepare('UPDATE collections SET generation = generation + 1 WHERE name = ? RETURNING generation'),
    setState: db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ?, generation = ? WHERE name = ?'),
    drop: db.prepare('DELETE FROM collections WHERE name = ?'),
    signature: db.prepare(SIGNATURE_SQL).pluck(),
    addSource: db.prepare('INSERT INTO sources (collection, root, added_at) VALUES (?, ?, ?) ON CONFLICT DO NOTHING'),
    listSources: db.prepare('SELECT collection, root FROM sources ORDER BY collection, root'),
    listSourcesOf: db.prepare('SELECT collection, root FROM sources WHERE collection = ? ORDER BY root'),
  };
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
      return (st.list.all() as { name: string }[]).map((r) => collections.getCollection(r.name)!);
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

const toDoc = (r: Record<string, unknown>): DocumentRecord => ({
  id: r.id as string,
  collection: r.collection as string,
  source: r.source as string,
  root: (r.root as string | null) ?? null,
  title: r.title as string,
  format: r.format as string,
  contentHash: r.content_hash as string,
  byteSize: r.byte_size as number,
  pageCount: (r.page_count as number | null) ?? null,
  effectiveDate: (r.effective_date as string | null) ?? null,
  metadata: JSON.parse((r.metadata as string) || '{}') as Record<string, string>,
  settingsKey: r.settings_key as string,
  createdAt: r.created_at as string,
  updatedAt: r.updated_at as string,
});

export function sqliteDocuments(db: Db, bumpGeneration: (collection: string) => number): DocumentStore {
  const st = {
    bySource: db.prepare('SELECT * FROM documents WHERE collection = ? AND source = ?'),
    byId: db.prepare('SELECT * FROM documents WHERE id = ?'),
    text: db.prepare('SELECT text FROM documents WHERE id = ?'),
    byContent: db.prepare('SELECT id, source FROM documents WHERE collection = ? AND content_hash = ? LIMIT 1'),
    of: db.prepare('SELECT * FROM documents WHERE collection = ? ORDER BY source'),
    count: db.prepare('SELECT count(*) AS n FROM documents'),
    countOf: db.prepare('SELECT count(*) AS n FROM documents WHERE collection = ?'),
    keys: db.prepare(`
      SELECT id, source, root, content_hash AS contentHash, settings_key AS settingsKey, updated_at AS updatedAt
      FROM documents WHERE collection = ? ORDER BY source`),
    chunkIdsOf: db.prepare('SELECT id FROM chunks WHERE document_id = ?'),
    deleteFts: db.prepare('DELETE FROM chunks_fts WHERE rowid = ?'),
    deleteChunksOf: db.prepare('DELETE FROM chunks WHERE document_id = ?'),
    delete: db.prepare('DELETE FROM documents WHERE id = ?'),
    upsert: db.prepare(`
      INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, updated_at)
      VALUES (@id, @collection, @source, @root, @title, @format, @contentHash, @byteSize, @pageCount,
        @effectiveDate, @metadata, @text, @settingsKey, @now, @now)
      ON CONFLICT(id) DO UPDATE SET source = excluded.source, root = excluded.root, title = excluded.title,
        format = excluded.format, content_hash = excluded.content_hash, byte_size = excluded.byte_size,
        page_count = excluded.page_count, effective_date = excluded.effective_date, metadata = excluded.metadata,
        text = excluded.text, settings_key = excluded.settings_key, updated_at = excluded.updated_at`),
    insertChunk: db.prepare(`
      INSERT INTO chunks (document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end,
        page_breaks, token_count, chunk_hash)
      VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`),
    insertFts: db.prepare('INSERT INTO chunks_fts (rowid, title, heading, body) VALUES (?, ?, ?, ?)'),
    insertVector: db.prepare('INSERT INTO vectors (model_id, chunk_hash, dimensions, vector) VALUES (?, ?, ?, ?) ON CONFLICT DO NOTHING'),
    copy: db.prepare(`
      INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, updated_at)
      SELECT @id, @collection, @source, @root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, @now
      FROM documents WHERE id = @fromId`),
    moveChunks: db.prepare('UPDATE chunks SET document_id = ? WHERE document_id = ?'),
    ftsSourceOf: db.prepare('SELECT id, heading_path AS headingPath, text FROM chunks WHERE document_id = ? ORDER BY id'),
  };

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
          const removedChunkIds = removeChunksOf(doc.id, doc.collection);
          st.upsert.run({ ...doc, metadata: JSON.stringify(doc.metadata), now: now() });
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
          bumpGeneration(doc.collection);
          return { removedChunkIds, chunkIds };
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
          const moved = st.moveChunks.run(to.id, fromId).changes;
          st.delete.run(fromId);
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
