// Reading chunks and their vectors from SQLite, and ranking them with FTS5's bm25().

import type { PageBreak } from '../../types.js';
import type { ChunkRef, ChunkSpan, ChunkStore, ChunkView, FtsRow, LexicalStore, VectorStore } from '../types.js';
import type { Statement } from 'better-sqlite3';
import type { Db } from './db.js';
import { filteredDocumentsSql } from './document-filter.js';
import { blobToVector, vectorToBlob } from './vector-blob.js';

/** A column weight as FTS5's rank function text takes it (a plain decimal, never NaN or an exponent). */
const ftsWeightText = (x: number): string => (Number.isFinite(x) && x >= 0 ? x.toFixed(6) : '1.0');

/** The stored `[[offset, page], ...]` form; NULL (a chunk stored before page breaks were recorded, or on one page) is none. */
export function parsePageBreaks(raw: unknown): PageBreak[] {
  if (typeof raw !== 'string' || raw === '') return [];
  const pairs = JSON.parse(raw) as [number, number][];
  return pairs.map(([at, page]) => ({ at, page }));
}

export function sqliteChunks(db: Db): ChunkStore & VectorStore {
  const st = {
    views: db.prepare(`
      SELECT k.id, k.document_id, k.text, k.start_offset, k.end_offset, k.heading_path, k.page_start, k.page_end, k.page_breaks, k.chunk_hash,
        d.source, d.title, d.effective_date, json_extract(d.metadata, '$.version') AS version
      FROM chunks k JOIN documents d ON d.id = k.document_id WHERE k.id IN (SELECT value FROM json_each(?))`),
    texts: db.prepare('SELECT id, text FROM chunks WHERE id IN (SELECT value FROM json_each(?))'),
    ofCollection: db.prepare(`
      SELECT k.id, k.chunk_hash AS chunkHash FROM chunks k JOIN documents d ON d.id = k.document_id
      WHERE d.collection = ? ORDER BY k.id`),
    ofDocuments: db.prepare('SELECT id, chunk_hash AS chunkHash FROM chunks WHERE document_id IN (SELECT value FROM json_each(?)) ORDER BY id'),
    count: db.prepare('SELECT count(*) AS n FROM chunks WHERE document_id = ?').pluck(),
    spans: db.prepare(`
      SELECT start_offset, end_offset, heading_path, page_start, page_end FROM chunks
      WHERE document_id = ? AND start_offset < ? AND end_offset > ? ORDER BY ordinal`),
    chunkVectors: db.prepare(`
      SELECT k.id, v.vector FROM chunks k JOIN vectors v ON v.model_id = ? AND v.chunk_hash = k.chunk_hash
      WHERE k.id IN (SELECT value FROM json_each(?))`),
    vector: db.prepare('SELECT vector FROM vectors WHERE model_id = ? AND chunk_hash = ?'),
    hasVector: db.prepare('SELECT 1 FROM vectors WHERE model_id = ? AND chunk_hash = ?').pluck(),
  };
  // Prepared on first use: a read-only connection (the lexical change thread's) never writes.
  let insertVector: Statement<unknown[]> | null = null;
  // A filter's statement depends only on how many conditions of each kind it has: prepared once per shape.
  const shapes = new Map<string, Statement<unknown[]>>();
  const cached = (sql: string): Statement<unknown[]> => {
    let s = shapes.get(sql);
    if (!s) {
      s = db.prepare(sql).pluck();
      if (shapes.size < 64) shapes.set(sql, s);
    }
    return s;
  };
  return {
    chunksOfCollection(collection) {
      return st.ofCollection.all(collection) as ChunkRef[];
    },
    chunksOfDocuments(ids) {
      if (ids.length === 0) return [];
      return st.ofDocuments.all(JSON.stringify(ids)) as ChunkRef[];
    },
    countChunks(documentId) {
      return st.count.get(documentId) as number;
    },
    chunkViews(ids) {
      const out = new Map<number, ChunkView>();
      if (ids.length === 0) return out;
      // One prepared statement for any number of ids (a JSON array, not a bound-parameter list).
      for (const r of st.views.all(JSON.stringify(ids)) as Record<string, unknown>[]) {
        out.set(r.id as number, {
          chunkId: r.id as number,
          documentId: r.document_id as string,
          source: r.source as string,
          title: r.title as string,
          text: r.text as string,
          start: r.start_offset as number,
          end: r.end_offset as number,
          headingPath: JSON.parse(r.heading_path as string) as string[],
          pageStart: (r.page_start as number | null) ?? null,
          pageEnd: (r.page_end as number | null) ?? null,
          pageBreaks: parsePageBreaks(r.page_breaks),
          effectiveDate: (r.effective_date as string | null) ?? null,
          version: typeof r.version === 'string' ? r.version : null,
          chunkHash: r.chunk_hash as string,
        });
      }
      return out;
    },
    chunkTexts(ids) {
      const out = new Map<number, string>();
      if (ids.length === 0) return out;
      for (const r of st.texts.all(JSON.stringify(ids)) as { id: number; text: string }[]) out.set(r.id, r.text);
      return out;
    },
    chunkSpans(documentId, start, end) {
      const rows = st.spans.all(documentId, end, start) as { start_offset: number; end_offset: number; heading_path: string; page_start: number | null; page_end: number | null }[];
      return rows.map(
        (r): ChunkSpan => ({
          start: r.start_offset,
          end: r.end_offset,
          headingPath: JSON.parse(r.heading_path) as string[],
          pageStart: r.page_start,
          pageEnd: r.page_end,
        }),
      );
    },
    chunkIdsMatching(collection, filter) {
      if (filter.documentIds?.length === 0) return new Set();
      const f = filteredDocumentsSql(collection, filter);
      // The documents first (index lookups), then their chunks through chunks_by_document.
      const rows = cached(`SELECT k.id FROM chunks k WHERE k.document_id IN (${f.sql})`).all(...f.params) as number[];
      return new Set(rows);
    },
    getVectors(modelId, hashes) {
      const out = new Map<string, Float32Array>();
      for (const h of hashes) {
        if (out.has(h)) continue;
        const r = st.vector.get(modelId, h) as { vector: Buffer } | undefined;
        if (r) out.set(h, blobToVector(r.vector));
      }
      return out;
    },
    vectorHashes(modelId, hashes) {
      const out = new Set<string>();
      for (const h of hashes) if (!out.has(h) && st.hasVector.get(modelId, h) !== undefined) out.add(h);
      return out;
    },
    putVectors(modelId, vectors) {
      insertVector ??= db.prepare('INSERT INTO vectors (model_id, chunk_hash, dimensions, vector) VALUES (?, ?, ?, ?) ON CONFLICT DO NOTHING');
      const insert = insertVector;
      db.transaction(() => {
        for (const [hash, v] of vectors) insert.run(modelId, hash, v.length, vectorToBlob(v));
      }).immediate();
    },
    chunkVectors(modelId, ids) {
      const out = new Map<number, Float32Array>();
      if (ids.length === 0) return out;
      for (const r of st.chunkVectors.all(modelId, JSON.stringify(ids)) as { id: number; vector: Buffer }[]) out.set(r.id, blobToVector(r.vector));
      return out;
    },
  };
}

export function sqliteFtsSearch(db: Db, collectionExists: (name: string) => boolean): LexicalStore['searchFts'] {
  // The name of the store's only collection, or null when there are none or several.
  const onlyCollection = db.prepare('SELECT CASE WHEN count(*) = 1 THEN max(name) END FROM collections').pluck();
  // Which collection each of some chunks belongs to (FTS5 ranks across collections).
  const collectionOfChunks = db
    .prepare('SELECT k.id, d.collection FROM chunks k JOIN documents d ON d.id = k.document_id WHERE k.id IN (SELECT value FROM json_each(?))')
    .raw();
  let ranked: ReturnType<Db['prepare']> | null = null;
  const rankedStatement = () =>
    (ranked ??= db.prepare('SELECT rowid, rank FROM chunks_fts WHERE chunks_fts MATCH ? AND rank MATCH ? ORDER BY rank LIMIT ?').raw());
  const keepCollection = (rows: [number, number][], collection: string): [number, number][] => {
    if (rows.length === 0) return rows;
    const of = new Map(collectionOfChunks.all(JSON.stringify(rows.map((r) => r[0]))) as [number, string][]);
    return rows.filter(([id]) => of.get(id) === collection);
  };

  return (collection, match, limit, w, filter) => {
    // FTS5's bm25() returns "more negative is better"; we negate it so larger is better everywhere else.
    const rank = `bm25(${ftsWeightText(w.title)}, ${ftsWeightText(w.heading)}, ${ftsWeightText(w.body)})`;
    if (!filter?.documentIds && Object.keys(filter?.metadata ?? {}).length === 0) {
      // FTS5 ranks and cuts to LIMIT on its own (ORDER BY rank), and only the rows kept are joined to their
      // collection. The FTS table holds every collection, so with more than one, fetch more than asked and
      // keep this collection's rows; widen until enough are kept or FTS5 has no more.
      const single = onlyCollection.get() === collection;
      if (!single && !collectionExists(collection)) return [];
      let want = single ? limit : limit * 2;
      for (;;) {
        const rows = rankedStatement().all(match, rank, want) as [number, number][];
        const kept = single ? rows : keepCollection(rows, collection);
        if (kept.length >= limit || rows.length < want) return kept.slice(0, limit).map(([id, r]) => ({ chunkId: id, score: -r }));
        want *= 4;
      }
    }
    // With a document filter, the filter sits in the same statement, so LIMIT counts only rows that pass it.
    if (filter?.documentIds?.length === 0) return [];
    const f = filteredDocumentsSql(collection, filter);
    return db
      .prepare(
        `SELECT f.rowid AS chunkId, -f.rank AS score
         FROM chunks_fts f JOIN chunks k ON k.id = f.rowid
         WHERE chunks_fts MATCH ? AND f.rank MATCH ? AND k.document_id IN (${f.sql})
         ORDER BY f.rank LIMIT ?`,
      )
      .all(match, rank, ...f.params, limit) as FtsRow[];
  };
}
