import type { IngestProgress, IngestSummary } from './pipeline.js';

/**
 * One status line for a terminal: a bar of files done, files, pages, chunks and rates so far, then the
 * current file, cut to `columns` so that a carriage return can overwrite it in place.
 */
export function formatProgress(p: IngestProgress, seconds: number, columns = 100): string {
  const rate = (n: number): string => (seconds > 0 ? (n / seconds).toFixed(n / seconds >= 10 ? 0 : 1) : '0');
  const share = p.filesTotal > 0 ? Math.min(1, p.filesDone / p.filesTotal) : 0;
  const filled = Math.round(share * BAR_WIDTH);
  const parts = [
    `[${'#'.repeat(filled)}${'.'.repeat(BAR_WIDTH - filled)}] ${String(Math.floor(share * 100)).padStart(3)}%`,
    `files ${p.filesDone}/${p.filesTotal}`,
    ...(p.failed > 0 ? [`failed ${p.failed}`] : []),
    `pages ${p.pages} (${rate(p.pages)}/s)`,
    `chunks ${p.chunks} (${rate(p.chunks)}/s)`,
    p.current,
  ];
  const line = parts.join('  ');
  const width = Math.max(20, columns - 1);
  return line.length <= width ? line : `${line.slice(0, width - 1)}…`;
}

const BAR_WIDTH = 20;

/** The human-readable summary printed after an ingest or re-index. */
export function formatSummary(s: IngestSummary): string {
  const d = s.documents;
  const lines = [
    `documents: ${d.added} added, ${d.updated} updated, ${d.renamed > 0 ? `${d.renamed} renamed, ` : ''}${d.unchanged} unchanged, ${d.removed} removed, ${d.failed} failed`,
    `chunks:    ${s.chunks.embedded} embedded, ${s.chunks.reused} reused, ${s.chunks.removed} removed`,
    `time:      ${s.seconds} s`,
  ];
  if (s.skipped.length > 0) lines.push(`skipped:   ${s.skipped.length} file(s) that are not documents`);
  for (const f of s.failures) lines.push(`failed:    ${f.source}: ${f.reason}`);
  return lines.join('\n');
}

/**
 * The `--json` summary: the documented keys first, in a fixed order, so scripts can rely on
 * `{documents:{added,updated,renamed,removed,unchanged,failed}, chunks:{embedded,reused,removed},
 * failures:[{source,reason}], seconds}`.
 */
export function summaryJson(s: IngestSummary): string {
  const d = s.documents;
  return JSON.stringify({
    documents: { added: d.added, updated: d.updated, renamed: d.renamed, removed: d.removed, unchanged: d.unchanged, failed: d.failed },
    chunks: { embedded: s.chunks.embedded, reused: s.chunks.reused, removed: s.chunks.removed },
    failures: s.failures.map((f) => ({ source: f.source, reason: f.reason })),
    seconds: s.seconds,
    skipped: s.skipped,
  });
}
