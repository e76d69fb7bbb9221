import type { DocumentFilter } from '../types.js';

/** Restricts a search to some documents: by id and/or by exact values of document metadata keys. */
export type RetrieveFilter = DocumentFilter;

export function isEmptyFilter(f: RetrieveFilter | undefined): boolean {
  return !f || (f.documentIds === undefined && Object.keys(f.metadata ?? {}).length === 0);
}
