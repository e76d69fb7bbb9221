// Collections, documents (with their versions), chunks, vectors and the change log in PostgreSQL.
//
// Every write runs in one transaction and records what it changed in `change_log` in that same transaction.
// Locks are always taken in one order, so two writers never deadlock: the document's own advisory lock (two
// writers of one document id run one after the other), then the collection rows (sorted by name), then the
// change log's lock just before its rows are written, held to commit. That last lock makes positions (a
// sequence) become visible in the order they were handed out, so a reader that has seen position p has seen
// every position below it (docs/architecture.md, "PostgreSQL back end").

import type { ChunkInput, ChunkView, CollectionRow, DocumentRecord, NewDocument } from '../types.js';
import type { ChangeBatch, ChangeEntry, ReplaceResult } from '../system-of-record.js';
import { blobToVector, vectorToBlob } from '../sqlite/vector-blob.js';
import { inTransaction, type PgClient, type PgPool } from './connect.js';
import { documentFromRow } from '../document-row.js';

/** The transaction-level advisory lock that orders writers of the change log ("sb-chlog" in ASCII). */
export const CHANGE_LOG_LOCK = 0x73622d63686c6f67n;

/** The LISTEN/NOTIFY channel a committed change of the log is announced on. */
export const CHANGE_CHANNEL = 'sourcebound_change_log';

/** A chunk as stored: the pipeline's chunk and, optionally, metadata of its own. */
export type PgChunkInput = ChunkInput & { metadata?: Record<string, unknown> };

type Row = Record<string, unknown>;

const toCollection = (r: Row): CollectionRow => ({
  name: r.name as string,
  embedderId: (r.embedder_id as string | null) ?? null,
  dimensions: (r.dimensions as number | null) ?? null,
  generation: r.generation as number,
  documents: r.document_count as number,
  chunks: r.chunk_count as number,
});

const toDocument = (r: Row): DocumentRecord & { version: number } => ({ ...documentFromRow(r, r.metadata as Record<string, string>), version: r.version as number });

const DOCUMENT_COLUMNS = `id, collection, source, root, title, format, content_hash, byte_size, page_count, effective_date,
  metadata, settings_key, created_at, updated_at, version`;

const lockDocument = (c: PgClient, id: string) => c.query("SELECT pg_advisory_xact_lock(hashtextextended('document:' || $1, 0))", [id]);

/** Inserts the collection when missing; true when this transaction created it. */
async function insertCollection(c: PgClient, name: string): Promise<boolean> {
  const r = await c.query('INSERT INTO collections (name) VALUES ($1) ON CONFLICT (name) DO NOTHING RETURNING name', [name]);
  return r.rowCount === 1;
}

/** Moves collections' counts and generations, rows locked in name order; returns each one's new generation. */
async function moveCollections(c: PgClient, deltas: Map<string, { documents: number; chunks: number }>): Promise<Map<string, number>> {
  const out = new Map<string, number>();
  for (const name of [...deltas.keys()].sort()) {
    const d = deltas.get(name)!;
    const r = await c.query<{ generation: number }>(
      `UPDATE collections SET document_count = document_count + $2, chunk_count = chunk_count + $3, generation = generation + 1
       WHERE name = $1 RETURNING generation`,
      [name, d.documents, d.chunks],
    );
    out.set(name, r.rows[0]!.generation);
  }
  return out;
}

interface LogRow {
  collection: string;
  kind: ChangeEntry['kind'];
  documentId: string | null;
  chunkId: number | null;
  generation: number;
}

/** Appends rows to the change log under its lock (held to commit): positions become visible in order. */
async function appendLog(c: PgClient, rows: LogRow[]): Promise<void> {
  if (rows.length === 0) return;
  await c.query('SELECT pg_advisory_xact_lock($1)', [CHANGE_LOG_LOCK.toString()]);
  await c.query(
    `INSERT INTO change_log (collection, kind, document_id, chunk_id, generation)
     SELECT * FROM unnest($1::text[], $2::text[], $3::text[], $4::bigint[], $5::bigint[])`,
    [rows.map((r) => r.collection), rows.map((r) => r.kind), rows.map((r) => r.documentId), rows.map((r) => r.chunkId), rows.map((r) => r.generation)],
  );
  // Delivered at commit (never for a rolled-back change), to every node listening: it wakes them early; the
  // nodes' polling stays the safety net for a notification missed while a listener reconnected.
  await c.query('SELECT pg_notify($1, NULL)', [CHANGE_CHANNEL]);
}

export function pgCorpus(pool: PgPool) {
  return {
    async ensureCollection(name: string): Promise<boolean> {
      return inTransaction(pool, async (c) => {
        if (!(await insertCollection(c, name))) return false;
        await appendLog(c, [{ collection: name, kind: 'collection-created', documentId: null, chunkId: null, generation: 0 }]);
        return true;
      });
    },

    async getCollection(name: string): Promise<CollectionRow | null> {
      const r = await pool.query('SELECT * FROM collections WHERE name = $1', [name]);
      return r.rows[0] ? toCollection(r.rows[0] as Row) : null;
    },

    async listCollections(): Promise<CollectionRow[]> {
      const r = await pool.query("SELECT * FROM collections WHERE left(name, 9) <> '~rebuild:' ORDER BY name");
      return r.rows.map((x) => toCollection(x as Row));
    },

    async getDocument(id: string): Promise<(DocumentRecord & { version: number }) | null> {
      const r = await pool.query(`SELECT ${DOCUMENT_COLUMNS} FROM documents WHERE id = $1`, [id]);
      return r.rows[0] ? toDocument(r.rows[0] as Row) : null;
    },

    async findDocumentByContent(collection: string, contentHash: string): Promise<(DocumentRecord & { version: number }) | null> {
      const r = await pool.query(`SELECT ${DOCUMENT_COLUMNS} FROM documents WHERE collection = $1 AND content_hash = $2 ORDER BY id LIMIT 1`, [collection, contentHash]);
      return r.rows[0] ? toDocument(r.rows[0] as Row) : null;
    },

    async getDocumentText(id: string): Promise<string | null> {
      const r = await pool.query<{ text: string }>('SELECT text FROM documents WHERE id = $1', [id]);
      return r.rows[0]?.text ?? null;
    },

    async listDocuments(collection: string): Promise<DocumentRecord[]> {
      const r = await pool.query(`SELECT ${DOCUMENT_COLUMNS} FROM documents WHERE collection = $1 ORDER BY source`, [collection]);
      return r.rows.map((x) => toDocument(x as Row));
    },

    async replaceDocument(doc: NewDocument, chunks: PgChunkInput[], vectors: Map<string, Float32Array>, modelId: string): Promise<ReplaceResult> {
      const ordinals = new Set(chunks.map((k) => k.ordinal));
      if (ordinals.size !== chunks.length) throw new Error(`replaceDocument: chunk ordinals of ${doc.id} are not distinct`);
      for (const k of chunks) {
        if (!(k.start >= 0 && k.start <= k.end)) throw new Error(`replaceDocument: chunk ${k.ordinal} of ${doc.id} has offsets [${k.start}, ${k.end})`);
      }
      return inTransaction(pool, async (c) => {
        await lockDocument(c, doc.id);
        const created = await insertCollection(c, doc.collection);
        const old = (await c.query<{ collection: string; version: number }>('SELECT collection, version FROM documents WHERE id = $1', [doc.id])).rows[0];
        const removed = (await c.query<{ id: number }>('DELETE FROM chunks WHERE document_id = $1 RETURNING id', [doc.id])).rows
          .map((r) => r.id)
          .sort((a, b) => a - b);
        const version = (old?.version ?? 0) + 1;
        await c.query(
          `INSERT INTO documents (id, collection, source, root, title, format, content_hash, byte_size, page_count,
             effective_date, metadata, text, settings_key, version)
           VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10, $11, $12, $13, $14)
           ON CONFLICT (id) DO UPDATE SET collection = excluded.collection, source = excluded.source, root = excluded.root,
             title = excluded.title, format = excluded.format, content_hash = excluded.content_hash,
             byte_size = excluded.byte_size, page_count = excluded.page_count, effective_date = excluded.effective_date,
             metadata = excluded.metadata, text = excluded.text, settings_key = excluded.settings_key,
             version = excluded.version, updated_at = now()`,
          [doc.id, doc.collection, doc.source, doc.root, doc.title, doc.format, doc.contentHash, doc.byteSize, doc.pageCount,
            doc.effectiveDate, JSON.stringify(doc.metadata), doc.text, doc.settingsKey, version],
        );
        const inserted = await c.query<{ id: number; ordinal: number }>(
          `INSERT INTO chunks (document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end,
             page_breaks, token_count, chunk_hash, metadata)
           SELECT $1, * FROM unnest($2::int[], $3::text[], $4::int[], $5::int[], $6::jsonb[], $7::int[], $8::int[],
             $9::jsonb[], $10::int[], $11::text[], $12::jsonb[])
           RETURNING id, ordinal`,
          [
            doc.id,
            chunks.map((k) => k.ordinal),
            chunks.map((k) => k.text),
            chunks.map((k) => k.start),
            chunks.map((k) => k.end),
            chunks.map((k) => JSON.stringify(k.headingPath)),
            chunks.map((k) => k.pageStart),
            chunks.map((k) => k.pageEnd),
            chunks.map((k) => (k.pageBreaks && k.pageBreaks.length > 0 ? JSON.stringify(k.pageBreaks.map((b) => [b.at, b.page])) : null)),
            chunks.map((k) => k.tokenCount),
            chunks.map((k) => k.chunkHash),
            chunks.map((k) => JSON.stringify(k.metadata ?? {})),
          ],
        );
        const idOf = new Map(inserted.rows.map((r) => [r.ordinal, r.id]));
        const chunkIds = chunks.map((k) => idOf.get(k.ordinal)!);
        const hashes = [...new Set(chunks.map((k) => k.chunkHash))].filter((h) => vectors.has(h));
        if (hashes.length > 0) {
          await c.query(
            `INSERT INTO vectors (model_id, chunk_hash, dimensions, vector)
             SELECT $1, * FROM unnest($2::text[], $3::int[], $4::bytea[]) ON CONFLICT DO NOTHING`,
            [modelId, hashes, hashes.map((h) => vectors.get(h)!.length), hashes.map((h) => vectorToBlob(vectors.get(h)!))],
          );
        }
        await c.query(
          'INSERT INTO document_versions (document_id, version, content_hash, settings_key, chunk_count) VALUES ($1, $2, $3, $4, $5)',
          [doc.id, version, doc.contentHash, doc.settingsKey, chunks.length],
        );
        const deltas = new Map<string, { documents: number; chunks: number }>();
        if (old) deltas.set(old.collection, { documents: -1, chunks: -removed.length });
        const mine = deltas.get(doc.collection) ?? { documents: 0, chunks: 0 };
        deltas.set(doc.collection, { documents: mine.documents + 1, chunks: mine.chunks + chunks.length });
        const generations = await moveCollections(c, deltas);
        const generation = generations.get(doc.collection)!;
        await appendLog(c, [
          ...(created ? [{ collection: doc.collection, kind: 'collection-created' as const, documentId: null, chunkId: null, generation }] : []),
          ...removed.map((id) => ({
            collection: old!.collection,
            kind: 'chunk-removed' as const,
            documentId: doc.id,
            chunkId: id,
            generation: generations.get(old!.collection)!,
          })),
          ...chunkIds.map((id) => ({ collection: doc.collection, kind: 'chunk-added' as const, documentId: doc.id, chunkId: id, generation })),
        ]);
        return { removedChunkIds: removed, chunkIds, generation, version };
      });
    },

    async deleteDocument(id: string): Promise<number[]> {
      return inTransaction(pool, async (c) => {
        await lockDocument(c, id);
        const doc = (await c.query<{ collection: string }>('SELECT collection FROM documents WHERE id = $1', [id])).rows[0];
        if (!doc) return [];
        const removed = (await c.query<{ id: number }>('DELETE FROM chunks WHERE document_id = $1 RETURNING id', [id])).rows
          .map((r) => r.id)
          .sort((a, b) => a - b);
        await c.query('DELETE FROM documents WHERE id = $1', [id]);
        const generation = (await moveCollections(c, new Map([[doc.collection, { documents: -1, chunks: -removed.length }]]))).get(doc.collection)!;
        await appendLog(
          c,
          removed.map((chunkId) => ({ collection: doc.collection, kind: 'chunk-removed' as const, documentId: id, chunkId, generation })),
        );
        return removed;
      });
    },

    async chunkViews(ids: readonly number[]): Promise<Map<number, ChunkView>> {
      const out = new Map<number, ChunkView>();
      if (ids.length === 0) return out;
      const r = await pool.query(
        `SELECT k.id, k.document_id, k.text, k.start_offset, k.end_offset, k.heading_path, k.page_start, k.page_end, k.page_breaks,
           k.chunk_hash, d.source, d.title, d.effective_date, d.metadata->>'version' AS version
         FROM chunks k JOIN documents d ON d.id = k.document_id WHERE k.id = ANY($1::bigint[])`,
        [ids],
      );
      for (const row of r.rows as Row[]) {
        const breaks = (row.page_breaks as [number, number][] | null) ?? [];
        out.set(row.id as number, {
          chunkId: row.id as number,
          documentId: row.document_id as string,
          source: row.source as string,
          title: row.title as string,
          text: row.text as string,
          start: row.start_offset as number,
          end: row.end_offset as number,
          headingPath: row.heading_path as string[],
          pageStart: (row.page_start as number | null) ?? null,
          pageEnd: (row.page_end as number | null) ?? null,
          pageBreaks: breaks.map(([at, page]) => ({ at, page })),
          effectiveDate: (row.effective_date as string | null) ?? null,
          version: (row.version as string | null) ?? null,
          chunkHash: row.chunk_hash as string,
        });
      }
      return out;
    },

    async chunkVectors(modelId: string, ids: readonly number[]): Promise<Map<number, Float32Array>> {
      const out = new Map<number, Float32Array>();
      if (ids.length === 0) return out;
      const r = await pool.query<{ id: number; vector: Buffer }>(
        `SELECT k.id, v.vector FROM chunks k JOIN vectors v ON v.model_id = $1 AND v.chunk_hash = k.chunk_hash
         WHERE k.id = ANY($2::bigint[])`,
        [modelId, ids],
      );
      for (const row of r.rows) out.set(row.id, blobToVector(row.vector));
      return out;
    },

    async changesSince(position: number, limit = 10_000): Promise<ChangeBatch> {
      if (!Number.isSafeInteger(position) || position < 0) throw new Error(`changesSince: position ${position} is not a non-negative integer`);
      if (!Number.isSafeInteger(limit) || limit < 1) throw new Error(`changesSince: limit ${limit} is not a positive integer`);
      const r = await pool.query(
        `SELECT position, collection, kind, document_id, chunk_id, generation FROM change_log
         WHERE position > $1 ORDER BY position LIMIT $2`,
        [position, limit + 1],
      );
      const entries: ChangeEntry[] = (r.rows as Row[]).slice(0, limit).map((x) => ({
        position: x.position as number,
        collection: x.collection as string,
        kind: x.kind as ChangeEntry['kind'],
        documentId: (x.document_id as string | null) ?? null,
        chunkId: (x.chunk_id as number | null) ?? null,
        generation: x.generation as number,
      }));
      return { head: entries.at(-1)?.position ?? position, entries, more: r.rows.length > limit };
    },

    async changeHead(): Promise<number> {
      const r = await pool.query<{ p: number | null }>('SELECT max(position) AS p FROM change_log');
      return r.rows[0]?.p ?? 0;
    },
  };
}
