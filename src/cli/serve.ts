// `sourcebound serve`: the HTTP service. Holds the port with a stand-in while the runtime is built, then
// listens, seeds an empty store, loads the vector indexes, and shuts down cleanly on SIGTERM or SIGINT.

import { authEnforced, checkAuthConfig } from '../api/auth.js';
import { createRuntime, createServer } from '../runtime.js';
import { prepare } from './prepare.js';
import { servePg } from './serve-pg.js';
import { startStandIn } from './stand-in.js';
import { EXIT, type CliContext } from './context.js';

// How often a server started by an npm script checks that npm is still there.
const PARENT_CHECK_MS = 500;

export async function serve(ctx: CliContext): Promise<number> {
  const cfg = ctx.config();
  checkAuthConfig(cfg.auth, cfg.server.host);
  const logger = ctx.logger(cfg);
  // The port answers from the first moment: a stand-in holds it while the runtime is built.
  const standIn = await startStandIn(cfg.server.host, cfg.server.port);
  if (cfg.storage.backend === 'postgres') {
    return servePg(cfg, logger, standIn, (handler) => {
      process.on('SIGTERM', () => void handler('SIGTERM'));
      process.on('SIGINT', () => void handler('SIGINT'));
    });
  }
  let rt: Awaited<ReturnType<typeof createRuntime>>;
  try {
    rt = await createRuntime(cfg, logger);
  } catch (err) {
    await standIn.close();
    throw err;
  }
  logger.info(
    { auth: authEnforced(cfg.auth, cfg.server.host) ? `required (${cfg.auth.keys.length} keys)` : 'off (loopback only)' },
    'access control',
  );
  const level = rt.embedder.semantic ? 'info' : 'warn';
  logger[level](
    { embedder: rt.embedder.id, semantic: rt.embedder.semantic, dimensions: rt.embedder.dimensions },
    `embedder: ${rt.embedderReason}`,
  );
  let ready = false;
  // Collections whose index is loaded answer before the others are (start-up loads them one by one).
  const readyCollections = new Set<string>();
  const { app, queue } = createServer(rt, { isReady: (c) => ready || (c !== undefined && readyCollections.has(c)) });
  let closing = false;
  const shutdown = async (signal: string): Promise<void> => {
    if (closing) return;
    closing = true;
    logger.info({ signal }, 'shutting down: finishing in-flight requests');
    try {
      await app.close();
      await queue.close();
    } finally {
      rt.close();
      logger.info('stopped');
      process.exit(EXIT.ok);
    }
  };
  process.on('SIGTERM', () => void shutdown('SIGTERM'));
  process.on('SIGINT', () => void shutdown('SIGINT'));
  // Started by an npm script (`npm start`): npm does not pass a SIGTERM on to the script it runs, so
  // the server would outlive it on its port. When the launcher is gone (this process is re-parented),
  // stop as for SIGTERM. Only then: a server started with `nohup … &` must outlive its shell.
  if (ctx.env.npm_lifecycle_event) {
    const launcher = process.ppid;
    setInterval(() => {
      if (process.ppid !== launcher) void shutdown('launcher exited');
    }, PARENT_CHECK_MS).unref();
  }
  // The stand-in hands the port over (the same one when the configuration asked for any free port).
  await standIn.close();
  await app.listen({ host: cfg.server.host, port: standIn.port });
  try {
    await prepare(rt, { onReady: (c) => readyCollections.add(c) });
    // The in-memory BM25 index is built before the service says it is ready, as on the PostgreSQL back end: until
    // it is, FTS5 answers the lexical leg, and under a load of queries that slow path starved the background build
    // (measured: 18-20 searches/s at 10k chunks for a whole 10 s load run, 81% of the time in FTS5).
    await rt.lexicalIndex?.whenReady();
  } catch (err) {
    logger.fatal({ err }, 'start-up failed');
    await app.close();
    rt.close();
    return EXIT.failed;
  }
  ready = true;
  const cols = rt.repo.listCollections();
  logger.info(
    { collections: cols.map((c) => ({ name: c.name, documents: c.documents, chunks: c.chunks })) },
    `ready on http://${cfg.server.host}:${(app.server.address() as { port: number }).port}`,
  );
  return new Promise<number>(() => undefined); // runs until a signal
}
