// `sourcebound worker`: runs the jobs of the PostgreSQL back end (uploads from any API node, re-indexes of a
// collection) until SIGTERM or SIGINT, which let the job in hand finish. Its data folder holds a scratch store
// of its own (what the pipeline writes before the document goes to the database, and the vectors it made).

import path from 'node:path';
import { createSharedWorker, sharedPaths, thisProcess } from '../jobs/index.js';
import { createRuntime } from '../runtime.js';
import { postgresSettings } from '../runtime-options.js';
import { createOriginals, readLocalDocument, type SqliteStore } from '../store/index.js';
import { EXIT, type CliContext } from './context.js';
import { openWhenReachable } from './serve-pg.js';

export async function worker(ctx: CliContext, opts: { pollMs?: number } = {}): Promise<number> {
  const cfg = ctx.config();
  const pgs = postgresSettings(cfg);
  const logger = ctx.logger(cfg);
  const rt = await createRuntime(cfg, logger);
  const sor = await openWhenReachable(pgs.url, logger, 3);
  const owner = thisProcess();
  const db = (rt.store as SqliteStore).db;
  const w = createSharedWorker({
    sor,
    ingestor: rt.ingestor,
    readScratch: (id) => readLocalDocument(db, id, rt.embedder.id),
    modelId: rt.embedder.id,
    sharedDir: pgs.sharedDir,
    originals: createOriginals(sharedPaths(pgs.sharedDir).originalsDir),
    stagingDir: path.join(cfg.dataDir, 'staging'),
    owner,
    leaseMs: cfg.limits.jobLeaseSeconds * 1000,
    logger,
    ...(opts.pollMs ? { pollMs: opts.pollMs } : {}),
  });
  let closing = false;
  const stop = async (signal: string): Promise<void> => {
    if (closing) return;
    closing = true;
    logger.info({ signal }, 'stopping after the job in hand');
    try {
      await w.close();
      await sor.close();
    } finally {
      rt.close();
      process.exit(EXIT.ok);
    }
  };
  process.on('SIGTERM', () => void stop('SIGTERM'));
  process.on('SIGINT', () => void stop('SIGINT'));
  w.start();
  logger.info({ holder: owner.holder, pid: owner.pid, embedder: rt.embedder.id }, 'worker ready: taking jobs');
  return new Promise<number>(() => undefined); // runs until a signal
}
