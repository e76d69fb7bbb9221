import type { Db } from '../store/index.js';
import type { DocumentFilter } from '../types.js';

/** Restricts a search to some documents: by id and/or by exact values of document metadata keys. */
export type RetrieveFilter = DocumentFilter;

export function isEmptyFilter(f: RetrieveFilter | undefined): boolean {
  return !f || (f.documentIds === undefined && Object.keys(f.metadata ?? {}).length === 0);
}

/**
 * Chunk ids of the collection that pass the filter. The dense leg hands this set to the vector search, so
 * the filter is applied while searching rather than to a k-long result afterwards (which could leave
 * nothing when the filter is selective).
 */
export function allowedChunkIds(db: Db, collection: string, filter: RetrieveFilter): Set<number> {
  const where = ['d.collection = ?'];
  const params: unknown[] = [collection];
  if (filter.documentIds) {
    where.push('d.id IN (SELECT value FROM json_each(?))');
    params.push(JSON.stringify(filter.documentIds));
  }
  for (const [key, value] of Object.entries(filter.metadata ?? {})) {
    where.push('json_extract(d.metadata, ?) = ?');
    params.push(`$.${JSON.stringify(key)}`, value);
  }
  const rows = db
    .prepare(`SELECT k.id FROM chunks k JOIN documents d ON d.id = k.document_id WHERE ${where.join(' AND ')}`)
    .pluck()
    .all(...params) as number[];
  return new Set(rows);
}
