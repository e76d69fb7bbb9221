// The local snapshot of a node that follows a PostgreSQL system of record: the node's own SQLite store, written
// with the very rows the database holds (document rows, chunks under the same ids, offsets and pages, vectors),
// so the lexical index (FTS5 and its change log, the in-memory engine) and the vector index pick them up
// exactly as they pick up an embedded ingest, and rank with the same code. A batch of copies and the log
// position it brings the node to are written in one transaction: after a crash the node resumes from a
// position whose changes are all in the store.

import { ftsColumns } from '../fts-columns.js';
import type { ChunkInput, NewDocument } from '../types.js';
import { documentFromRow } from '../document-row.js';
import { parsePageBreaks } from './chunks.js';
import type { Db } from './db.js';
import { blobToVector, vectorToBlob } from './vector-blob.js';

/** A document as the followed database holds it: its version there and its chunks with their ids. */
export interface ReplicaDocument {
  version: number;
  doc: NewDocument;
  chunks: (ChunkInput & { id: number })[];
  vectors: Map<string, Float32Array>;
}

export type ReplicaWrite =
  | { kind: 'collection'; name: string }
  | { kind: 'put'; copy: ReplicaDocument }
  | { kind: 'delete'; id: string };

/** What one write changed in a collection: what the vector index learns in place. */
export interface ReplicaChange {
  collection: string;
  generation: number;
  removed: number[];
  added: { id: number; chunkHash: string }[];
}

export interface FollowState {
  systemId: string;
  position: number;
}

export interface LocalReplica {
  /** The database this store follows and the log position it has applied; null when it never followed one. */
  followed(): FollowState | null;
  /** The version of the document last copied here and its chunk ids now; null when none is here. */
  copied(documentId: string): { version: number; chunkIds: number[] } | null;
  /** How many documents the store holds (a store with documents and no follow state was an embedded one). */
  documentCount(): number;
  /**
   * Writes the batch and records `state` in one transaction. Every collection a copy lands in is bound to
   * `embedder` when it has no embedder yet. Returns each write's effect, in order.
   */
  apply(state: FollowState, writes: readonly ReplicaWrite[], modelId: string, embedder: { id: string; dimensions: number }): ReplicaChange[];
}

const now = (): string => new Date().toISOString();

/** Reads one document of a local store back with its chunks (ids, offsets, pages) and its vectors of `modelId`. */
export function readLocalDocument(db: Db, id: string, modelId: string): ReplicaDocument | null {
  const d = db.prepare('SELECT * FROM documents WHERE id = ?').get(id) as Record<string, unknown> | undefined;
  if (!d) return null;
  const rows = db
    .prepare(`SELECT id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end, page_breaks, token_count, chunk_hash
      FROM chunks WHERE document_id = ? ORDER BY id`)
    .all(id) as Record<string, unknown>[];
  const vectors = new Map<string, Float32Array>();
  const vec = db.prepare('SELECT vector FROM vectors WHERE model_id = ? AND chunk_hash = ?').pluck();
  for (const r of rows) {
    const blob = vec.get(modelId, r.chunk_hash) as Buffer | undefined;
    if (blob) vectors.set(r.chunk_hash as string, blobToVector(blob));
  }
  const version = db.prepare('SELECT version FROM follow_documents WHERE document_id = ?').pluck().get(id) as number | undefined;
  const { createdAt: _created, updatedAt: _updated, ...fields } = documentFromRow(d, JSON.parse((d.metadata as string) || '{}') as Record<string, string>);
  return {
    version: version ?? 0,
    doc: { ...fields, text: d.text as string },
    chunks: rows.map((r) => {
      const breaks = parsePageBreaks(r.page_breaks);
      return {
        id: r.id as number,
        ordinal: r.ordinal as number,
        text: r.text as string,
        start: r.start_offset as number,
        end: r.end_offset as number,
        headingPath: JSON.parse(r.heading_path as string) as string[],
        pageStart: (r.page_start as number | null) ?? null,
        pageEnd: (r.page_end as number | null) ?? null,
        ...(breaks.length > 0 ? { pageBreaks: breaks } : {}),
        tokenCount: r.token_count as number,
        chunkHash: r.chunk_hash as string,
      };
    }),
    vectors,
  };
}

export function sqliteReplica(db: Db): LocalReplica {
  const st = {
    get: db.prepare('SELECT value FROM follow_state WHERE key = ?').pluck(),
    set: db.prepare('INSERT INTO follow_state (key, value) VALUES (?, ?) ON CONFLICT(key) DO UPDATE SET value = excluded.value'),
    version: db.prepare('SELECT version FROM follow_documents WHERE document_id = ?').pluck(),
    setVersion: db.prepare('INSERT INTO follow_documents (document_id, version) VALUES (?, ?) ON CONFLICT(document_id) DO UPDATE SET version = excluded.version'),
    documents: db.prepare('SELECT count(*) FROM documents').pluck(),
    ensureCollection: db.prepare('INSERT INTO collections (name, created_at) VALUES (?, ?) ON CONFLICT(name) DO NOTHING'),
    bindEmbedder: db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ? WHERE name = ? AND embedder_id IS NULL'),
    bump: db.prepare('UPDATE collections SET generation = generation + 1 WHERE name = ? RETURNING generation').pluck(),
    addCounts: db.prepare('UPDATE collections SET document_count = document_count + ?, chunk_count = chunk_count + ? WHERE name = ?'),
    docOf: db.prepare('SELECT collection FROM documents WHERE id = ?').pluck(),
    bySource: db.prepare('SELECT id FROM documents WHERE collection = ? AND source = ? AND id <> ?').pluck(),
    chunkIdsOf: db.prepare('SELECT id FROM chunks WHERE document_id = ? ORDER BY id').pluck(),
    deleteFts: db.prepare('DELETE FROM chunks_fts WHERE rowid = ?'),
    deleteChunksOf: db.prepare('DELETE FROM chunks WHERE document_id = ?'),
    deleteDoc: db.prepare('DELETE FROM documents WHERE id = ?'),
    deleteMeta: db.prepare('DELETE FROM document_metadata WHERE document_id = ?'),
    insertMeta: db.prepare('INSERT INTO document_metadata (document_id, collection, key, value) VALUES (?, ?, ?, ?)'),
    upsert: db.prepare(`
      INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, updated_at)
      VALUES (@id, @collection, @source, @root, @title, @format, @contentHash, @byteSize, @pageCount,
        @effectiveDate, @metadata, @text, @settingsKey, @now, @now)
      ON CONFLICT(id) DO UPDATE SET collection = excluded.collection, source = excluded.source, root = excluded.root,
        title = excluded.title, format = excluded.format, content_hash = excluded.content_hash,
        byte_size = excluded.byte_size, page_count = excluded.page_count, effective_date = excluded.effective_date,
        metadata = excluded.metadata, text = excluded.text, settings_key = excluded.settings_key,
        updated_at = excluded.updated_at`),
    insertChunk: db.prepare(`
      INSERT INTO chunks (id, document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end,
        page_breaks, token_count, chunk_hash)
      VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`),
    insertFts: db.prepare('INSERT INTO chunks_fts (rowid, title, heading, body) VALUES (?, ?, ?, ?)'),
    insertVector: db.prepare('INSERT INTO vectors (model_id, chunk_hash, dimensions, vector) VALUES (?, ?, ?, ?) ON CONFLICT DO NOTHING'),
  };

  /** Removes a document with its chunks and lexical rows; the collection's counts move. Returns its chunk ids. */
  const remove = (id: string): { collection: string; removed: number[] } | null => {
    const collection = st.docOf.get(id) as string | undefined;
    if (collection === undefined) return null;
    const removed = st.chunkIdsOf.all(id) as number[];
    for (const k of removed) st.deleteFts.run(k);
    st.deleteChunksOf.run(id);
    st.deleteDoc.run(id);
    st.addCounts.run(-1, -removed.length, collection);
    return { collection, removed };
  };

  const put = (copy: ReplicaDocument, modelId: string, embedder: { id: string; dimensions: number }): ReplicaChange[] => {
    const { doc, chunks } = copy;
    const out: ReplicaChange[] = [];
    // Another document of the same source here is one the database has already replaced: it goes first.
    for (const other of st.bySource.all(doc.collection, doc.source, doc.id) as string[]) {
      const r = remove(other);
      if (r) out.push({ collection: r.collection, generation: st.bump.get(r.collection) as number, removed: r.removed, added: [] });
    }
    st.ensureCollection.run(doc.collection, now());
    st.bindEmbedder.run(embedder.id, embedder.dimensions, doc.collection);
    const was = st.docOf.get(doc.id) as string | undefined;
    const removed = st.chunkIdsOf.all(doc.id) as number[];
    for (const k of removed) st.deleteFts.run(k);
    st.deleteChunksOf.run(doc.id);
    if (was !== undefined) st.addCounts.run(-1, -removed.length, was);
    if (was !== undefined && was !== doc.collection) {
      out.push({ collection: was, generation: st.bump.get(was) as number, removed, added: [] });
    }
    st.upsert.run({ ...doc, metadata: JSON.stringify(doc.metadata), now: now() });
    st.deleteMeta.run(doc.id);
    for (const [key, value] of Object.entries(doc.metadata)) {
      if (typeof value === 'string') st.insertMeta.run(doc.id, doc.collection, key, value);
    }
    st.addCounts.run(1, chunks.length, doc.collection);
    for (const c of chunks) {
      const pageBreaks = c.pageBreaks && c.pageBreaks.length > 0 ? JSON.stringify(c.pageBreaks.map((b) => [b.at, b.page])) : null;
      st.insertChunk.run(c.id, doc.id, c.ordinal, c.text, c.start, c.end, JSON.stringify(c.headingPath), c.pageStart, c.pageEnd, pageBreaks, c.tokenCount, c.chunkHash);
      const cols = ftsColumns(doc.title, c.headingPath, c.text);
      st.insertFts.run(c.id, cols.title, cols.heading, cols.body);
      const v = copy.vectors.get(c.chunkHash);
      if (v) st.insertVector.run(modelId, c.chunkHash, v.length, vectorToBlob(v));
    }
    st.setVersion.run(doc.id, copy.version);
    out.push({
      collection: doc.collection,
      generation: st.bump.get(doc.collection) as number,
      removed: was === doc.collection ? removed : [],
      added: chunks.map((c) => ({ id: c.id, chunkHash: c.chunkHash })),
    });
    return out;
  };

  return {
    followed() {
      const systemId = st.get.get('system_id') as string | undefined;
      const position = st.get.get('position') as string | undefined;
      return systemId === undefined ? null : { systemId, position: Number(position ?? 0) };
    },
    copied(documentId) {
      const version = st.version.get(documentId) as number | undefined;
      return version === undefined ? null : { version, chunkIds: st.chunkIdsOf.all(documentId) as number[] };
    },
    documentCount() {
      return st.documents.get() as number;
    },
    apply(state, writes, modelId, embedder) {
      return db
        .transaction(() => {
          const out: ReplicaChange[] = [];
          for (const w of writes) {
            if (w.kind === 'collection') {
              st.ensureCollection.run(w.name, now());
              st.bindEmbedder.run(embedder.id, embedder.dimensions, w.name);
            } else if (w.kind === 'put') {
              out.push(...put(w.copy, modelId, embedder));
            } else {
              const r = remove(w.id);
              if (r) out.push({ collection: r.collection, generation: st.bump.get(r.collection) as number, removed: r.removed, added: [] });
            }
          }
          st.set.run('system_id', state.systemId);
          st.set.run('position', String(state.position));
          return out;
        })
        .immediate();
    },
  };
}
