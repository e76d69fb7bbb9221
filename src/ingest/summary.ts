// What an ingest run reports: documents by outcome, chunks embedded or reused, and each failure.

export type FileOutcome = 'added' | 'updated' | 'renamed' | 'unchanged' | 'failed' | 'skipped';

export interface IngestSummary {
  documents: { added: number; updated: number; renamed: number; removed: number; unchanged: number; failed: number };
  chunks: { embedded: number; reused: number; removed: number };
  failures: { source: string; reason: string }[];
  skipped: string[];
  seconds: number;
}

export function emptySummary(): IngestSummary {
  return {
    documents: { added: 0, updated: 0, renamed: 0, removed: 0, unchanged: 0, failed: 0 },
    chunks: { embedded: 0, reused: 0, removed: 0 },
    failures: [],
    skipped: [],
    seconds: 0,
  };
}

/** Adds a run's counts and failures into a total (seconds are left to the caller). */
export function addInto(total: IngestSummary, s: IngestSummary): void {
  for (const k of Object.keys(total.documents) as (keyof IngestSummary['documents'])[]) total.documents[k] += s.documents[k];
  for (const k of Object.keys(total.chunks) as (keyof IngestSummary['chunks'])[]) total.chunks[k] += s.chunks[k];
  total.failures.push(...s.failures);
  total.skipped.push(...s.skipped);
}

/** Records a document that could not be ingested. */
export function fail(summary: IngestSummary, source: string, reason: string): FileOutcome {
  summary.documents.failed++;
  summary.failures.push({ source, reason });
  return 'failed';
}
