import type { PageBreak } from '../types.js';
import type { Db } from './db.js';

export interface CollectionRow {
  name: string;
  embedderId: string | null;
  dimensions: number | null;
  generation: number;
  documents: number;
  chunks: number;
}

export interface DocumentRecord {
  id: string;
  collection: string;
  source: string;
  root: string | null;
  title: string;
  format: string;
  contentHash: string;
  byteSize: number;
  pageCount: number | null;
  effectiveDate: string | null;
  metadata: Record<string, string>;
  settingsKey: string;
  createdAt: string;
  updatedAt: string;
}

export interface ChunkInput {
  ordinal: number;
  text: string;
  start: number;
  end: number;
  headingPath: string[];
  /** The page of the chunk's first character. */
  pageStart: number | null;
  pageEnd: number | null;
  /** Pages that begin inside the chunk, in document offsets; left out, none are recorded. */
  pageBreaks?: PageBreak[];
  tokenCount: number;
  chunkHash: string;
}

export interface ChunkRecord extends ChunkInput {
  id: number;
  documentId: string;
}

/** A chunk joined with its document: what retrieval hands on. */
export interface ChunkView {
  chunkId: number;
  documentId: string;
  source: string;
  title: string;
  text: string;
  start: number;
  end: number;
  headingPath: string[];
  pageStart: number | null;
  pageEnd: number | null;
  /** Pages that begin inside the chunk; empty for chunks stored before these were recorded. */
  pageBreaks: PageBreak[];
  effectiveDate: string | null;
  /** The document's stated version or issue ("Issue 4", "v2.1"), when it states one. */
  version?: string | null;
  chunkHash: string;
}

export interface NewDocument {
  id: string;
  collection: string;
  source: string;
  root: string | null;
  title: string;
  format: string;
  contentHash: string;
  byteSize: number;
  pageCount: number | null;
  effectiveDate: string | null;
  metadata: Record<string, string>;
  text: string;
  settingsKey: string;
}

export interface DocumentKey {
  id: string;
  source: string;
  root: string | null;
  contentHash: string;
  settingsKey: string;
  updatedAt: string;
}

/**
 * A full re-index builds into a shadow collection of this name and swaps it in at the end. Collection names
 * start with a letter or digit (src/api/schemas.ts), so a shadow never clashes with a real collection.
 */
export const SHADOW_PREFIX = '~rebuild:';
export const shadowCollectionName = (collection: string): string => `${SHADOW_PREFIX}${collection}`;

export interface FtsRow {
  chunkId: number;
  score: number;
}

/** Narrows a search to some documents: by id, and/or by exact values of document metadata keys. */
export interface SearchFilter {
  documentIds?: readonly string[];
  metadata?: Readonly<Record<string, string>>;
}

export interface Repository {
  readonly db: Db;
  ensureCollection(name: string): void;
  getCollection(name: string): CollectionRow | null;
  /** The collection row without its counts: one primary-key lookup, for the query path. */
  collectionState(name: string): Omit<CollectionRow, 'documents' | 'chunks'> | null;
  listCollections(): CollectionRow[];
  setCollectionEmbedder(name: string, embedderId: string, dimensions: number): void;
  bumpGeneration(name: string): number;
  addSourceRoot(collection: string, root: string): void;
  listSourceRoots(collection?: string): { collection: string; root: string }[];
  getDocumentBySource(collection: string, source: string): DocumentRecord | null;
  getDocument(id: string): DocumentRecord | null;
  getDocumentText(id: string): string | null;
  listDocuments(collection: string): DocumentRecord[];
  countDocuments(collection?: string): number;
  /** Replaces a document and all of its chunks in one transaction. Returns the removed chunk ids. */
  replaceDocument(doc: NewDocument, chunks: ChunkInput[], vectors: Map<string, Float32Array>, modelId: string): {
    removedChunkIds: number[];
    chunkIds: number[];
  };
  deleteDocument(id: string): number[];
  /** Each document of a collection without its text: what change detection needs. */
  documentKeys(collection: string): DocumentKey[];
  /**
   * Moves a document to a new id, collection and source, keeping its chunks (and so their vectors and FTS
   * rows): a renamed file, or a document built in a shadow collection. Returns the number of chunks moved.
   */
  moveDocument(fromId: string, to: { id: string; collection: string; source: string; root: string | null }): number;
  /** Sets what a full re-index switched a collection to; the generation is set, not bumped. */
  setCollectionState(name: string, state: { embedderId: string; dimensions: number; generation: number }): void;
  /** Removes an (empty) collection row, e.g. a shadow collection after its swap. */
  dropCollection(name: string): void;
  chunksOfCollection(collection: string): { id: number; chunkHash: string }[];
  chunksOfDocuments(ids: readonly string[]): { id: number; chunkHash: string }[];
  chunkViews(ids: readonly number[]): Map<number, ChunkView>;
  /** Chunk texts alone (no document join), e.g. for query expansion. */
  chunkTexts(ids: readonly number[]): Map<number, string>;
  /** Stored vectors of chunks by chunk id, in one statement. */
  chunkVectors(modelId: string, ids: readonly number[]): Map<number, Float32Array>;
  getVectors(modelId: string, hashes: readonly string[]): Map<string, Float32Array>;
  searchFts(collection: string, match: string, limit: number, weights: FtsWeights, filter?: SearchFilter): FtsRow[];
  transaction<T>(fn: () => T): T;
}

export interface FtsWeights {
  title: number;
  heading: number;
  body: number;
}

const now = (): string => new Date().toISOString();
/** A column weight as FTS5's rank function text takes it (a plain decimal, never NaN or an exponent). */
const num = (x: number): string => (Number.isFinite(x) && x >= 0 ? x.toFixed(6) : '1.0');

/**
 * What one chunk puts in each FTS column. A chunk's text starts with the heading lines above it and its
 * heading path usually starts with the document title, so indexing them as they are counts the title up to
 * three times (title, heading and body columns) and outweighs the body. Each column keeps only what no other
 * column already holds; the column weights then decide how much a title or heading match is worth.
 */
export function ftsColumns(title: string, headingPath: readonly string[], text: string): { title: string; heading: string; body: string } {
  const t = title.trim();
  const headings = headingPath.map((h) => h.trim()).filter((h) => h !== '' && h !== t);
  const known = new Set([t, ...headings]);
  let body = text;
  for (;;) {
    const nl = body.indexOf('\n');
    const first = (nl < 0 ? body : body.slice(0, nl)).trim();
    if (first === '' && nl >= 0) {
      body = body.slice(nl + 1);
      continue;
    }
    if (!known.has(first)) break;
    body = nl < 0 ? '' : body.slice(nl + 1);
  }
  return { title: t, heading: headings.join(' > '), body };
}

export function vectorToBlob(v: Float32Array): Buffer {
  return Buffer.from(v.buffer, v.byteOffset, v.byteLength);
}

export function blobToVector(b: Buffer): Float32Array {
  // Copy: the Buffer may share (and be unaligned within) a larger allocation.
  const copy = new Uint8Array(b.byteLength);
  copy.set(b);
  return new Float32Array(copy.buffer);
}

export function createRepository(db: Db): Repository {
  const st = {
    ensureCollection: db.prepare(
      'INSERT INTO collections (name, created_at) VALUES (?, ?) ON CONFLICT(name) DO NOTHING',
    ),
    getCollection: db.prepare(`
      SELECT c.name, c.embedder_id AS embedderId, c.dimensions, c.generation,
        (SELECT count(*) FROM documents d WHERE d.collection = c.name) AS documents,
        (SELECT count(*) FROM chunks k JOIN documents d ON d.id = k.document_id WHERE d.collection = c.name) AS chunks
      FROM collections c WHERE c.name = ?`),
    // Shadow collections of a running full re-index are not collections anyone asked for.
    collectionState: db.prepare(
      'SELECT name, embedder_id AS embedderId, dimensions, generation FROM collections WHERE name = ?',
    ),
    chunkViews: db.prepare(`
      SELECT k.id, k.document_id, k.text, k.start_offset, k.end_offset, k.heading_path, k.page_start, k.page_end, k.page_breaks, k.chunk_hash,
        d.source, d.title, d.effective_date, json_extract(d.metadata, '$.version') AS version
      FROM chunks k JOIN documents d ON d.id = k.document_id WHERE k.id IN (SELECT value FROM json_each(?))`),
    chunkTexts: db.prepare('SELECT id, text FROM chunks WHERE id IN (SELECT value FROM json_each(?))'),
    chunkVectors: db.prepare(`
      SELECT k.id, v.vector FROM chunks k JOIN vectors v ON v.model_id = ? AND v.chunk_hash = k.chunk_hash
      WHERE k.id IN (SELECT value FROM json_each(?))`),
    // The name of the store's only collection, or null when there are none or several.
    onlyCollection: db.prepare('SELECT CASE WHEN count(*) = 1 THEN max(name) END FROM collections').pluck(),
    // Which collection each of some chunks belongs to (FTS5 ranks across collections; see searchFts).
    collectionOfChunks: db.prepare(`
      SELECT k.id, d.collection FROM chunks k JOIN documents d ON d.id = k.document_id
      WHERE k.id IN (SELECT value FROM json_each(?))`).raw(),
    listCollections: db.prepare("SELECT name FROM collections WHERE substr(name, 1, 9) <> '~rebuild:' ORDER BY name"),
    setEmbedder: db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ? WHERE name = ?'),
    bump: db.prepare('UPDATE collections SET generation = generation + 1 WHERE name = ? RETURNING generation'),
    addSource: db.prepare(
      'INSERT INTO sources (collection, root, added_at) VALUES (?, ?, ?) ON CONFLICT DO NOTHING',
    ),
    listSources: db.prepare('SELECT collection, root FROM sources ORDER BY collection, root'),
    listSourcesOf: db.prepare('SELECT collection, root FROM sources WHERE collection = ? ORDER BY root'),
    docBySource: db.prepare('SELECT * FROM documents WHERE collection = ? AND source = ?'),
    docById: db.prepare('SELECT * FROM documents WHERE id = ?'),
    docText: db.prepare('SELECT text FROM documents WHERE id = ?'),
    docsOf: db.prepare('SELECT * FROM documents WHERE collection = ? ORDER BY source'),
    countDocs: db.prepare('SELECT count(*) AS n FROM documents'),
    countDocsOf: db.prepare('SELECT count(*) AS n FROM documents WHERE collection = ?'),
    chunkIdsOfDoc: db.prepare('SELECT id FROM chunks WHERE document_id = ?'),
    deleteFts: db.prepare('DELETE FROM chunks_fts WHERE rowid = ?'),
    deleteChunksOfDoc: db.prepare('DELETE FROM chunks WHERE document_id = ?'),
    deleteDoc: db.prepare('DELETE FROM documents WHERE id = ?'),
    upsertDoc: db.prepare(`
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
    insertVector: db.prepare(
      'INSERT INTO vectors (model_id, chunk_hash, dimensions, vector) VALUES (?, ?, ?, ?) ON CONFLICT DO NOTHING',
    ),
    documentKeys: db.prepare(`
      SELECT id, source, root, content_hash AS contentHash, settings_key AS settingsKey, updated_at AS updatedAt
      FROM documents WHERE collection = ? ORDER BY source`),
    copyDoc: db.prepare(`
      INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, updated_at)
      SELECT @id, @collection, @source, @root, title, format, content_hash, byte_size, page_count,
        effective_date, metadata, text, settings_key, created_at, @now
      FROM documents WHERE id = @fromId`),
    moveChunks: db.prepare('UPDATE chunks SET document_id = ? WHERE document_id = ?'),
    ftsSourceOfDoc: db.prepare('SELECT id, heading_path AS headingPath, text FROM chunks WHERE document_id = ? ORDER BY id'),
    setState: db.prepare('UPDATE collections SET embedder_id = ?, dimensions = ?, generation = ? WHERE name = ?'),
    dropCollection: db.prepare('DELETE FROM collections WHERE name = ?'),
    chunksOfCollection: db.prepare(`
      SELECT k.id, k.chunk_hash AS chunkHash FROM chunks k JOIN documents d ON d.id = k.document_id
      WHERE d.collection = ? ORDER BY k.id`),
    getVector: db.prepare('SELECT vector FROM vectors WHERE model_id = ? AND chunk_hash = ?'),
  };

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

  // Documents of a shadow collection (a full re-index in progress) get no FTS rows until they are swapped in:
  // every query's BM25 runs over the one FTS table, and a second copy of a collection in it made queries
  // 2-3x slower for as long as a full re-index ran (docs/benchmarks.md, "Re-index").
  const isShadow = (collection: string): boolean => collection.startsWith(SHADOW_PREFIX);

  const removeChunksOf = (docId: string, collection: string): number[] => {
    const ids = (st.chunkIdsOfDoc.all(docId) as { id: number }[]).map((r) => r.id);
    if (!isShadow(collection)) for (const id of ids) st.deleteFts.run(id);
    st.deleteChunksOfDoc.run(docId);
    return ids;
  };

  let ranked: ReturnType<Db['prepare']> | null = null;
  const rankedStatement = () =>
    (ranked ??= db.prepare('SELECT rowid, rank FROM chunks_fts WHERE chunks_fts MATCH ? AND rank MATCH ? ORDER BY rank LIMIT ?').raw());
  const keepCollection = (rows: [number, number][], collection: string): [number, number][] => {
    if (rows.length === 0) return rows;
    const of = new Map(st.collectionOfChunks.all(JSON.stringify(rows.map((r) => r[0]))) as [number, string][]);
    return rows.filter(([id]) => of.get(id) === collection);
  };

  const repo: Repository = {
    db,
    ensureCollection(name) {
      st.ensureCollection.run(name, now());
    },
    getCollection(name) {
      const r = st.getCollection.get(name) as CollectionRow | undefined;
      return r ?? null;
    },
    collectionState(name) {
      const r = st.collectionState.get(name) as Omit<CollectionRow, 'documents' | 'chunks'> | undefined;
      return r ?? null;
    },
    listCollections() {
      return (st.listCollections.all() as { name: string }[]).map((r) => repo.getCollection(r.name)!);
    },
    setCollectionEmbedder(name, embedderId, dimensions) {
      st.setEmbedder.run(embedderId, dimensions, name);
    },
    bumpGeneration(name) {
      const r = st.bump.get(name) as { generation: number } | undefined;
      return r?.generation ?? 0;
    },
    addSourceRoot(collection, root) {
      st.addSource.run(collection, root, now());
    },
    listSourceRoots(collection) {
      return (collection ? st.listSourcesOf.all(collection) : st.listSources.all()) as {
        collection: string;
        root: string;
      }[];
    },
    getDocumentBySource(collection, source) {
      const r = st.docBySource.get(collection, source) as Record<string, unknown> | undefined;
      return r ? toDoc(r) : null;
    },
    getDocument(id) {
      const r = st.docById.get(id) as Record<string, unknown> | undefined;
      return r ? toDoc(r) : null;
    },
    getDocumentText(id) {
      const r = st.docText.get(id) as { text: string } | undefined;
      return r?.text ?? null;
    },
    listDocuments(collection) {
      return (st.docsOf.all(collection) as Record<string, unknown>[]).map(toDoc);
    },
    countDocuments(collection) {
      const r = (collection ? st.countDocsOf.get(collection) : st.countDocs.get()) as { n: number };
      return r.n;
    },
    replaceDocument(doc, chunks, vectors, modelId) {
      return db
        .transaction(() => {
          const removedChunkIds = removeChunksOf(doc.id, doc.collection);
          st.upsertDoc.run({ ...doc, metadata: JSON.stringify(doc.metadata), now: now() });
          const chunkIds: number[] = [];
          for (const c of chunks) {
            const info = st.insertChunk.run(
              doc.id,
              c.ordinal,
              c.text,
              c.start,
              c.end,
              JSON.stringify(c.headingPath),
              c.pageStart,
              c.pageEnd,
              c.pageBreaks && c.pageBreaks.length > 0 ? JSON.stringify(c.pageBreaks.map((b) => [b.at, b.page])) : null,
              c.tokenCount,
              c.chunkHash,
            );
            const id = Number(info.lastInsertRowid);
            chunkIds.push(id);
            const cols = ftsColumns(doc.title, c.headingPath, c.text);
            if (!isShadow(doc.collection)) st.insertFts.run(id, cols.title, cols.heading, cols.body);
            const v = vectors.get(c.chunkHash);
            if (v) st.insertVector.run(modelId, c.chunkHash, v.length, vectorToBlob(v));
          }
          repo.bumpGeneration(doc.collection);
          return { removedChunkIds, chunkIds };
        })
        .immediate();
    },
    deleteDocument(id) {
      return db
        .transaction(() => {
          const d = st.docById.get(id) as { collection: string } | undefined;
          if (!d) return [];
          const removed = removeChunksOf(id, d.collection);
          st.deleteDoc.run(id);
          repo.bumpGeneration(d.collection);
          return removed;
        })
        .immediate();
    },
    documentKeys(collection) {
      return st.documentKeys.all(collection) as DocumentKey[];
    },
    moveDocument(fromId, to) {
      return db
        .transaction(() => {
          if (fromId === to.id) throw new Error(`moveDocument: ${fromId} onto itself`);
          // A copy under the new id first, then the chunks, then the old row: no moment where the foreign key
          // of a chunk points nowhere, and the chunk rows (ids, hashes, FTS rows) stay as they were.
          const from = st.docById.get(fromId) as { collection: string; title: string } | undefined;
          if (!from) throw new Error(`moveDocument: no document ${fromId}`);
          st.copyDoc.run({ ...to, fromId, now: now() });
          const moved = st.moveChunks.run(to.id, fromId).changes;
          st.deleteDoc.run(fromId);
          if (isShadow(from.collection) && !isShadow(to.collection)) {
            for (const c of st.ftsSourceOfDoc.all(to.id) as { id: number; headingPath: string; text: string }[]) {
              const cols = ftsColumns(from.title, JSON.parse(c.headingPath) as string[], c.text);
              st.insertFts.run(c.id, cols.title, cols.heading, cols.body);
            }
          }
          return moved;
        })
        .immediate();
    },
    setCollectionState(name, state) {
      st.setState.run(state.embedderId, state.dimensions, state.generation, name);
    },
    dropCollection(name) {
      st.dropCollection.run(name);
    },
    chunksOfCollection(collection) {
      return st.chunksOfCollection.all(collection) as { id: number; chunkHash: string }[];
    },
    chunksOfDocuments(ids) {
      if (ids.length === 0) return [];
      return db
        .prepare('SELECT id, chunk_hash AS chunkHash FROM chunks WHERE document_id IN (SELECT value FROM json_each(?)) ORDER BY id')
        .all(JSON.stringify(ids)) as { id: number; chunkHash: string }[];
    },
    chunkViews(ids) {
      const out = new Map<number, ChunkView>();
      if (ids.length === 0) return out;
      // One prepared statement for any number of ids (a JSON array, not a bound-parameter list).
      const rows = st.chunkViews.all(JSON.stringify(ids)) as Record<string, unknown>[];
      for (const r of rows) {
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
      for (const r of st.chunkTexts.all(JSON.stringify(ids)) as { id: number; text: string }[]) out.set(r.id, r.text);
      return out;
    },
    chunkVectors(modelId, ids) {
      const out = new Map<number, Float32Array>();
      if (ids.length === 0) return out;
      for (const r of st.chunkVectors.all(modelId, JSON.stringify(ids)) as { id: number; vector: Buffer }[]) out.set(r.id, blobToVector(r.vector));
      return out;
    },
    getVectors(modelId, hashes) {
      const out = new Map<string, Float32Array>();
      for (const h of hashes) {
        if (out.has(h)) continue;
        const r = st.getVector.get(modelId, h) as { vector: Buffer } | undefined;
        if (r) out.set(h, blobToVector(r.vector));
      }
      return out;
    },
    searchFts(collection, match, limit, w, filter) {
      // FTS5's bm25() returns "more negative is better"; we negate it so larger is better everywhere else.
      const rank = `bm25(${num(w.title)}, ${num(w.heading)}, ${num(w.body)})`;
      if (!filter?.documentIds && Object.keys(filter?.metadata ?? {}).length === 0) {
        // FTS5 ranks and cuts to LIMIT on its own (ORDER BY rank), and only the rows kept are joined to their
        // collection. The FTS table holds every collection, so with more than one, fetch more than asked and
        // keep this collection's rows; widen until enough are kept or FTS5 has no more.
        const single = st.onlyCollection.get() === collection;
        if (!single && !repo.collectionState(collection)) return [];
        let want = single ? limit : limit * 2;
        for (;;) {
          const rows = rankedStatement().all(match, rank, want) as [number, number][];
          const kept = single ? rows : keepCollection(rows, collection);
          if (kept.length >= limit || rows.length < want) return kept.slice(0, limit).map(([id, r]) => ({ chunkId: id, score: -r }));
          want *= 4;
        }
      }
      // With a document filter, the filter sits in the same statement, so LIMIT counts only rows that pass it.
      const where: string[] = [];
      const params: unknown[] = [];
      if (filter?.documentIds) {
        if (filter.documentIds.length === 0) return [];
        where.push(`d.id IN (SELECT value FROM json_each(?))`);
        params.push(JSON.stringify(filter.documentIds));
      }
      for (const [key, value] of Object.entries(filter?.metadata ?? {})) {
        where.push(`json_extract(d.metadata, ?) = ?`);
        params.push(`$.${JSON.stringify(key)}`, value);
      }
      const rows = db
        .prepare(
          `SELECT f.rowid AS chunkId, -f.rank AS score
           FROM chunks_fts f JOIN chunks k ON k.id = f.rowid JOIN documents d ON d.id = k.document_id
           WHERE chunks_fts MATCH ? AND f.rank MATCH ? AND d.collection = ?${where.map((x) => ` AND ${x}`).join('')}
           ORDER BY f.rank LIMIT ?`,
        )
        .all(match, rank, collection, ...params, limit) as FtsRow[];
      return rows;
    },
    transaction(fn) {
      return db.transaction(fn).immediate();
    },
  };
  return repo;
}

/** The stored `[[offset, page], ...]` form; NULL (a chunk stored before page breaks were recorded, or on one page) is none. */
function parsePageBreaks(raw: unknown): PageBreak[] {
  if (typeof raw !== 'string' || raw === '') return [];
  const pairs = JSON.parse(raw) as [number, number][];
  return pairs.map(([at, page]) => ({ at, page }));
}
