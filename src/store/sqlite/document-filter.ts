import type { DocumentFilter } from '../../types.js';

/**
 * The ids of the collection's documents that pass a filter, as one SELECT and its parameters: the one place a
 * filter becomes SQL, for the lexical search and for the allowed-chunk set alike. Each condition is a lookup in
 * an index (document ids in the primary key, metadata in document_metadata_by_value, migration 8) and the
 * conditions intersect, so the cost follows the documents that match, not the size of the collection.
 */
export function filteredDocumentsSql(collection: string, filter: DocumentFilter | undefined): { sql: string; params: unknown[] } {
  const parts: string[] = [];
  const params: unknown[] = [];
  if (filter?.documentIds) {
    parts.push('SELECT id FROM documents WHERE id IN (SELECT value FROM json_each(?)) AND collection = ?');
    params.push(JSON.stringify(filter.documentIds), collection);
  }
  for (const [key, value] of Object.entries(filter?.metadata ?? {})) {
    parts.push('SELECT document_id FROM document_metadata WHERE collection = ? AND key = ? AND value = ?');
    params.push(collection, key, value);
  }
  if (parts.length === 0) {
    parts.push('SELECT id FROM documents WHERE collection = ?');
    params.push(collection);
  }
  return { sql: parts.join(' INTERSECT '), params };
}
