// A `documents` row as a DocumentRecord: the same columns in both back ends. Only the metadata column's
// type differs (JSON text in SQLite, jsonb in PostgreSQL), so the caller passes it decoded.

import type { DocumentRecord } from './types.js';

export function documentFromRow(r: Record<string, unknown>, metadata: Record<string, string>): DocumentRecord {
  return {
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
    metadata,
    settingsKey: r.settings_key as string,
    createdAt: r.created_at as string,
    updatedAt: r.updated_at as string,
  };
}
