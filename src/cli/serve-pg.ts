// `sourcebound serve` on the PostgreSQL back end: an API node. Its runtime works on a local SQLite copy in its
// data folder, which the follower keeps in step with the database's change log; uploads go to the shared folder
// and become jobs in the database for the workers. /ready is 200 once the copy has reached the log head
// and while the database answers; when it stops answering the node reports not-ready (503 with Retry-After),
// keeps trying, and serves again once it is back, without a restart.

import { buildApp } from '../api/app.js';
import { createDeskService } from '../api/desk-service.js';
import type { Config } from '../config/index.js';
import { SourceboundError } from '../errors.js';
import { createSharedDocumentService, sharedPaths } from '../jobs/index.js';
import type { Logger } from '../logger.js';
import { appDeps, createRuntime } from '../runtime.js';
import { postgresSettings } from '../runtime-options.js';
import { createFollower, createOriginals, sqliteReplica, type SqliteStore } from '../store/index.js';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../store/pg/index.js';
import { EXIT } from './context.js';
import { syncIndexesInThread } from './prepare.js';

/** How long to wait between attempts to reach the database at start-up. */
const RETRY_MS = 1000;

const pause = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

/** Opens the system of record, trying again until it answers: a node started before its database waits for it. */
export async function openWhenReachable(url: string, logger: Logger, max: number): Promise<PgSystemOfRecord> {
  for (let attempt = 1; ; attempt++) {
    try {
      return await openPgSystemOfRecord(url, { max, connectTimeoutMs: 5000 });
    } catch (err) {
      if (attempt === 1 || attempt % 30 === 0) logger.warn({ err: (err as Error).message, attempt }, 'the database does not answer yet; trying again');
      await pause(RETRY_MS);
    }
  }
}

export async function servePg(
  cfg: Readonly<Config>,
  logger: Logger,
  standIn: { close(): Promise<void>; port: number },
  onSignal: (handler: (signal: string) => Promise<void>) => void,
): Promise<number> {
  const pgs = postgresSettings(cfg);
  let rt: Awaited<ReturnType<typeof createRuntime>>;
  let sor: PgSystemOfRecord;
  try {
    rt = await createRuntime(cfg, logger);
    sor = await openWhenReachable(pgs.url, logger, 6);
  } catch (err) {
    await standIn.close();
    throw err;
  }
  const follower = createFollower({
    sor,
    replica: sqliteReplica((rt.store as SqliteStore).db),
    indexes: rt.indexes,
    embedder: rt.embedder,
    logger: logger.child({ stage: 'follower' }),
    onApplied: () => rt.lexicalIndex?.refresh(),
    // A catch-up's graph is built in the start-up index thread, so the node keeps answering /health meanwhile.
    syncElsewhere: (collections) => syncIndexesInThread(rt, collections),
    pollMs: pgs.followPollMs,
  });
  let started = false;
  const isReady = (): boolean => {
    if (!started) return false;
    const s = follower.status();
    return s.connected && s.atHead;
  };
  const shared = sharedPaths(pgs.sharedDir);
  const originals = createOriginals(shared.originalsDir);
  const documents = createSharedDocumentService({ sor, local: rt.repo, sharedDir: pgs.sharedDir, originals, maxUploadBytes: cfg.limits.documentMaxBytes });
  const base = appDeps(rt, isReady, documents, undefined, { originalsDir: shared.originalsDir });
  const app = buildApp(cfg, {
    ...base,
    // Ratings from any node land in the database, where `feedback export` on any machine can read them.
    desk: createDeskService({ repo: rt.repo, ratings: sor.ratings, originals }),
    indexPosition: () => follower.status().position,
    health: () => ({ ...base.health(), backend: 'postgres', follower: follower.status() }),
  });
  let closing = false;
  onSignal(async (signal) => {
    if (closing) return;
    closing = true;
    logger.info({ signal }, 'shutting down: finishing in-flight requests');
    try {
      await app.close();
      await follower.close();
      await sor.close();
    } finally {
      rt.close();
      logger.info('stopped');
      process.exit(EXIT.ok);
    }
  });
  await standIn.close();
  await app.listen({ host: cfg.server.host, port: standIn.port });
  const t0 = performance.now();
  for (;;) {
    try {
      await follower.start();
      break;
    } catch (err) {
      // A snapshot of another database is for the operator to sort out; anything else is the database being away.
      if (err instanceof SourceboundError) {
        logger.fatal({ err }, 'start-up failed');
        await app.close();
        await sor.close();
        rt.close();
        return EXIT.failed;
      }
      logger.warn({ err: (err as Error).message }, 'catching up with the change log failed; trying again');
      await pause(RETRY_MS);
    }
  }
  // Collections the catch-up did not touch have their index loaded from the saved file now, not on a first query.
  for (const c of rt.repo.listCollections()) {
    await rt.indexes.preload?.(c.name);
    rt.indexes.sync(c.name);
    await rt.indexes.settled(c.name);
  }
  // The in-memory BM25 index is built before the node says it is ready: until it is, FTS5 answers the lexical leg,
  // and under a load of queries its slow path starved the background build (measured: 5 searches/s at 6,000
  // chunks, the build never finishing; docs/scale-out.md).
  await rt.lexicalIndex?.whenReady();
  started = true;
  const status = follower.status();
  logger.info(
    { position: status.position, seconds: Math.round(performance.now() - t0) / 1000, collections: rt.repo.listCollections().map((c) => ({ name: c.name, documents: c.documents, chunks: c.chunks })) },
    `ready on http://${cfg.server.host}:${(app.server.address() as { port: number }).port}`,
  );
  return new Promise<number>(() => undefined); // runs until a signal
}
