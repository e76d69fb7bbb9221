import type { IngestSummary } from '../ingest/index.js';
import type { JobRecord } from '../store/index.js';
import type { JobContext } from './context.js';
import { withReindexLock } from './lock.js';

/** What a queued job asks for. Jobs are plain rows; this is the one place that knows how to run them. */
export type JobPayload =
  | { kind: 'upload'; via: 'api'; collection: string; root: string; source: string }
  | { kind: 'reindex'; via: 'api'; collection?: string; full?: boolean };

export async function executeJob(ctx: Pick<JobContext, 'ingestor' | 'dataDir'>, job: JobRecord): Promise<IngestSummary> {
  const p = job.payload as JobPayload;
  if (p.kind === 'upload') {
    // The collection's upload folder is one of its source folders: ingesting it re-processes only what
    // changed (the new file), exactly as a re-index would.
    return ctx.ingestor.ingestPath(p.root, { collection: p.collection, removeMissing: true });
  }
  if (p.kind === 'reindex') {
    return withReindexLock(ctx.dataDir, () =>
      ctx.ingestor.reindex({ ...(p.collection ? { collection: p.collection } : {}), full: p.full ?? false }),
    );
  }
  throw new Error(`unknown job kind ${(p as { kind: string }).kind}`);
}
