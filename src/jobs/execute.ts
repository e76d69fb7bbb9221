import path from 'node:path';
import type { IngestSummary } from '../ingest/index.js';
import type { JobRecord } from '../store/index.js';
import type { JobContext } from './context.js';
import { withReindexLock } from './lock.js';

/** What a queued job asks for. Jobs are plain rows; this is the one place that knows how to run them. */
export type JobPayload =
  | { kind: 'upload'; via: 'api'; collection: string; root: string; source: string; contentHash?: string }
  | { kind: 'reindex'; via: 'api'; collection?: string; full?: boolean };

/** A job that ran to its end without doing what it was for; the summary of what it did stays with it. */
export class JobFailed extends Error {
  constructor(
    message: string,
    readonly summary: IngestSummary,
  ) {
    super(message);
    this.name = 'JobFailed';
  }
}

export async function executeJob(ctx: Pick<JobContext, 'ingestor' | 'store' | 'owner' | 'leaseMs'>, job: JobRecord): Promise<IngestSummary> {
  const p = job.payload as JobPayload;
  if (p.kind === 'upload') {
    // Only the uploaded file: a file of the folder that failed before is not this job's to retry. The folder
    // stays one of the collection's source folders, so a re-index walks all of it.
    const summary = await ctx.ingestor.ingestPath(path.join(p.root, p.source), { collection: p.collection });
    // An upload is for its one file (ingestPath given a file walks no folder and hashes nothing else): when that
    // file could not be read, the job failed.
    const own = summary.failures.find((f) => f.source === p.source);
    if (own) throw new JobFailed(`${p.source}: ${own.reason}`, summary);
    return summary;
  }
  if (p.kind === 'reindex') {
    return withReindexLock({ leases: ctx.store.leases, owner: ctx.owner, leaseMs: ctx.leaseMs }, () =>
      ctx.ingestor.reindex({ ...(p.collection ? { collection: p.collection } : {}), full: p.full ?? false }),
    );
  }
  throw new Error(`unknown job kind ${(p as { kind: string }).kind}`);
}
