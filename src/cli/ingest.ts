// `sourcebound ingest` and `sourcebound reindex`: a summary on standard output (text, or one JSON object
// with --json), a progress bar on standard error when it is a terminal, and exit 1 when a document failed.

import type { Config } from '../config/index.js';
import { addInto, emptySummary, formatProgress, formatSummary, summaryJson, type IngestProgress, type IngestSummary } from '../ingest/index.js';
import { thisProcess, withReindexLock } from '../jobs/index.js';
import { createRuntime, ingestAsJob, type Runtime } from '../runtime.js';
import { CliError, EXIT, type CliContext } from './context.js';
import { enqueueReindex } from '../jobs/index.js';
import { postgresSettings } from '../runtime-options.js';
import { openPgSystemOfRecord } from '../store/pg/index.js';

export interface IngestOptions {
  collection?: string;
  full?: boolean;
  json?: boolean;
}

export async function ingest(ctx: CliContext, paths: string[], opts: IngestOptions): Promise<number> {
  const cfg = ctx.config();
  if (cfg.storage.backend === 'postgres') {
    // Writing into this machine's local copy would be overwritten by the follower and seen by no other node.
    throw new CliError('on storage.backend "postgres", add documents through an API node (POST /v1/collections/:collection/documents): workers ingest them');
  }
  const collection = opts.collection ?? cfg.seed.collection;
  return withRuntime(ctx, cfg, opts, async (rt) => {
    const total = emptySummary();
    for (const p of paths) {
      const s = await ingestAsJob(rt, 'ingest', collection, { path: p }, () =>
        rt.ingestor.ingestPath(p, { collection, force: opts.full ?? false }),
      );
      addSummary(total, s);
    }
    return total;
  });
}

export async function reindex(ctx: CliContext, opts: IngestOptions): Promise<number> {
  const cfg = ctx.config();
  if (cfg.storage.backend === 'postgres') return reindexShared(ctx, cfg, opts);
  return withRuntime(ctx, cfg, opts, async (rt) => {
    const what: { collection?: string; full?: boolean } = { full: opts.full ?? false };
    if (opts.collection) what.collection = opts.collection;
    return ingestAsJob(rt, 'reindex', opts.collection ?? null, what, () =>
      withReindexLock({ leases: rt.store.leases, owner: thisProcess(), leaseMs: cfg.limits.jobLeaseSeconds * 1000 }, () => rt.ingestor.reindex(what)),
    );
  });
}

/** Runs `work` on a runtime that draws progress on a terminal, then prints its summary. */
async function withRuntime(
  ctx: CliContext,
  cfg: Readonly<Config>,
  opts: IngestOptions,
  work: (rt: Runtime) => Promise<IngestSummary>,
): Promise<number> {
  const json = opts.json ?? false;
  const { io } = ctx;
  const tty = io.errIsTTY && !json;
  const started = performance.now();
  const onProgress = (p: IngestProgress): void => {
    if (!tty) return;
    // A pseudo-terminal with no size set reports 0 columns: treat it as unknown.
    io.err(`\r\x1b[2K${formatProgress(p, (performance.now() - started) / 1000, io.errColumns || 100)}`);
  };
  const rt = await createRuntime(cfg, ctx.logger(cfg, json), { onProgress });
  if (!rt.embedder.semantic && !json) io.err(`note: ${rt.embedderReason}\n`);
  try {
    const s = await work(rt);
    if (tty) io.err('\r\x1b[2K');
    io.out(`${json ? summaryJson(s) : formatSummary(s)}\n`);
    return s.documents.failed > 0 ? EXIT.failed : EXIT.ok;
  } finally {
    rt.close();
  }
}

function addSummary(total: IngestSummary, s: IngestSummary): void {
  addInto(total, s);
  total.seconds = Math.round((total.seconds + s.seconds) * 1000) / 1000;
}

/** On the PostgreSQL back end: one re-index job per collection, for the workers (each under its collection's lease). */
async function reindexShared(ctx: CliContext, cfg: Readonly<Config>, opts: IngestOptions): Promise<number> {
  const sor = await openPgSystemOfRecord(postgresSettings(cfg).url, { max: 1 });
  try {
    const jobs = await enqueueReindex(sor, { ...(opts.collection ? { collection: opts.collection } : {}), ...(opts.full ? { full: true } : {}) });
    const rows = jobs.map((j) => ({ job: j.id, collection: j.collection }));
    ctx.io.out(opts.json ? `${JSON.stringify({ queued: rows })}\n` : rows.map((r) => `queued re-index of ${r.collection}: job ${r.job}\n`).join(''));
    return EXIT.ok;
  } finally {
    await sor.close();
  }
}
