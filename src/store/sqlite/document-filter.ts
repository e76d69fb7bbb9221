import type { DocumentFilter } from '../../types.js';

/**
 * The conditions a document filter puts on `d` (the documents table), as SQL terms to AND together and their
 * parameters: the one place a filter becomes SQL, for the lexical search and for the allowed-chunk set alike.
 */
export function documentFilterSql(filter: DocumentFilter | undefined): { terms: string[]; params: unknown[] } {
  const terms: string[] = [];
  const params: unknown[] = [];
  if (filter?.documentIds) {
    terms.push('d.id IN (SELECT value FROM json_each(?))');
    params.push(JSON.stringify(filter.documentIds));
  }
  for (const [key, value] of Object.entries(filter?.metadata ?? {})) {
    terms.push('json_extract(d.metadata, ?) = ?');
    params.push(`$.${JSON.stringify(key)}`, value);
  }
  return { terms, params };
}
