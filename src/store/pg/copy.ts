// What an API node reads to copy one document into its local snapshot: the document as it is now, with its
// text, its chunks (their ids, offsets, pages and metadata) and their vectors, all read in one snapshot of the
// database, so the copy is a state the database was really in. And the database's identity.

import type { NewDocument } from '../types.js';
import { documentFromRow } from '../document-row.js';
import { blobToVector } from '../sqlite/vector-blob.js';
import type { PgPool } from './connect.js';
import type { DocumentCopy, StoredChunk } from '../system-of-record.js';

type Row = Record<string, unknown>;

/** One document as it is now, read in one snapshot; null when there is none. */
export async function readDocumentCopy(pool: PgPool, id: string, modelId: string): Promise<DocumentCopy | null> {
  return (await readDocumentCopies(pool, [id], modelId)).get(id) ?? null;
}

/**
 * Many documents as they are now, all read in one snapshot with three queries (documents, their chunks, the
 * chunks' vectors): a node catching up from an empty copy reads a run's documents at once instead of one round
 * trip each. Documents the database does not hold are absent from the map.
 */
export async function readDocumentCopies(pool: PgPool, ids: readonly string[], modelId: string): Promise<Map<string, DocumentCopy>> {
  const out = new Map<string, DocumentCopy>();
  if (ids.length === 0) return out;
  const c = await pool.connect();
  let broken: Error | undefined;
  try {
    await c.query('BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY');
    try {
      const docs = (await c.query('SELECT * FROM documents WHERE id = ANY($1::text[])', [ids])).rows as Row[];
      if (docs.length === 0) return out;
      const rows = (
        await c.query(
          `SELECT id, document_id, ordinal, text, start_offset, end_offset, heading_path, page_start, page_end, page_breaks,
             token_count, chunk_hash, metadata FROM chunks WHERE document_id = ANY($1::text[]) ORDER BY id`,
          [docs.map((d) => d.id as string)],
        )
      ).rows as Row[];
      const hashes = [...new Set(rows.map((r) => r.chunk_hash as string))];
      const vectorOf = new Map<string, Float32Array>();
      if (hashes.length > 0) {
        const v = await c.query<{ chunk_hash: string; vector: Buffer }>(
          'SELECT chunk_hash, vector FROM vectors WHERE model_id = $1 AND chunk_hash = ANY($2::text[])',
          [modelId, hashes],
        );
        for (const r of v.rows) vectorOf.set(r.chunk_hash, blobToVector(r.vector));
      }
      for (const d of docs) out.set(d.id as string, { version: d.version as number, doc: documentOf(d), chunks: [], vectors: new Map() });
      for (const r of rows) {
        const copy = out.get(r.document_id as string)!;
        const chunk = chunkOf(r);
        copy.chunks.push(chunk);
        const vector = vectorOf.get(chunk.chunkHash);
        if (vector) copy.vectors.set(chunk.chunkHash, vector);
      }
      return out;
    } finally {
      await c.query('COMMIT').catch((e: unknown) => {
        broken = e as Error;
      });
    }
  } finally {
    c.release(broken);
  }
}

function documentOf(d: Row): NewDocument {
  const record = documentFromRow(d, d.metadata as Record<string, string>);
  return {
    id: record.id,
    collection: record.collection,
    source: record.source,
    root: record.root,
    title: record.title,
    format: record.format,
    contentHash: record.contentHash,
    byteSize: record.byteSize,
    pageCount: record.pageCount,
    effectiveDate: record.effectiveDate,
    metadata: record.metadata,
    settingsKey: record.settingsKey,
    text: d.text as string,
  };
}

function chunkOf(r: Row): StoredChunk {
  const breaks = (r.page_breaks as [number, number][] | null) ?? [];
  return {
    id: Number(r.id),
    ordinal: r.ordinal as number,
    text: r.text as string,
    start: r.start_offset as number,
    end: r.end_offset as number,
    headingPath: r.heading_path as string[],
    pageStart: (r.page_start as number | null) ?? null,
    pageEnd: (r.page_end as number | null) ?? null,
    ...(breaks.length > 0 ? { pageBreaks: breaks.map(([at, page]) => ({ at, page })) } : {}),
    tokenCount: r.token_count as number,
    chunkHash: r.chunk_hash as string,
    metadata: (r.metadata as Record<string, unknown> | null) ?? {},
  };
}

/** The identity made when the database's schema was created (migration 2). */
export async function readSystemId(pool: PgPool): Promise<string> {
  const r = await pool.query<{ id: string }>('SELECT id::text AS id FROM system_identity ORDER BY created_at LIMIT 1');
  const id = r.rows[0]?.id;
  if (!id) throw new Error('the database has no system identity row (migration 2)');
  return id;
}
