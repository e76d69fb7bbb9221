#!/usr/bin/env node
// The one entry point: serve | ingest | reindex | eval | model | config.
// Only this file reads process.env and argv, creates the logger, listens and handles signals.

import { randomBytes } from 'node:crypto';
import { existsSync, realpathSync } from 'node:fs';
import path from 'node:path';
import { authEnforced, checkAuthConfig, newApiKey, sha256Hex } from './api/auth.js';
import { openStore, storePaths } from './store/index.js';
import { withReindexLock } from './jobs/index.js';
import { parseArgs } from 'node:util';
import { configReference, loadConfig, redactConfig, type Config } from './config/index.js';
import { modelPath, modelPresent, pullModel } from './embed/index.js';
import { SourceboundError } from './errors.js';
import { formatProgress, formatSummary, summaryJson, type IngestProgress, type IngestSummary } from './ingest/index.js';
import { createLogger, type Logger } from './logger.js';
import { createRuntime, createServer, ingestAsJob, type Runtime } from './runtime.js';
import { runEvalCommand } from './eval/command.js';
import { runFeedbackCommand } from './feedback/index.js';

const USAGE = `sourcebound: answers questions from your documents, with citations

Usage:
  sourcebound serve                              start the HTTP service (npm start)
  sourcebound ingest <path> [--collection C] [--full] [--json]
                                                 add a folder or file; folders are remembered for reindex
  sourcebound reindex [--collection C] [--full] [--json]
                                                 bring every remembered folder's documents up to date
  sourcebound eval retrieval --corpus F --queries F --qrels F [--mode M] [--k N] [--run F] [--json]
                                                 measure retrieval on a test collection (TREC qrels)
  sourcebound eval answers --questions F [--docs DIR] [--extractive] [--json]
                                                 measure answers on a labelled question set
  sourcebound eval fit --features F[,F...] [--out-dir D] [--module F]
                                                 fit the answer models, leave one corpus out
  sourcebound model pull [<id>]                  download the embedding model into the model folder
  sourcebound model status                       say which embedder the service would use
  sourcebound key new [--id ID] [--scopes query,ingest,admin] [--collections C1,C2|*]
                                                 make an API key and print its config entry
  sourcebound feedback export [--out F] [--collection C]
                                                 write the desk's answer ratings as a question set
                                                 for \`eval answers --questions F\`
  sourcebound backup <file>                      write a consistent copy of the database (safe while serving)
  sourcebound config [--check] [--reference]     print the effective configuration (secrets redacted),
                                                 validate it, or list every option

Environment: PORT, HOST, SOURCEBOUND_DATA_DIR, SOURCEBOUND_CONFIG (a JSON file), SOURCEBOUND_LOG_LEVEL,
SOURCEBOUND_EMBEDDER, SOURCEBOUND_MODEL_DIR, SOURCEBOUND_COMPLETION_URL, SOURCEBOUND_COMPLETION_MODEL,
SOURCEBOUND_COMPLETION_API_KEY. See docs/configuration.md.`;

export async function main(argv: string[], env: Record<string, string | undefined>): Promise<number> {
  const [command, ...rest] = argv;
  if (!command || command === 'help' || command === '--help' || command === '-h') {
    process.stdout.write(`${USAGE}\n`);
    return command ? 0 : 2;
  }
  // `<command> --help` prints the usage instead of running the command (`eval` has its own, fuller help).
  if (command !== 'eval' && (rest.includes('--help') || rest.includes('-h'))) {
    const lines = USAGE.split('\n');
    const mine = lines.filter((l, i) => l.startsWith(`  sourcebound ${command}`) || (i > 0 && /^\s{40,}/.test(l) && lines.slice(0, i).reverse().find((x) => !/^\s{40,}/.test(x))?.startsWith(`  sourcebound ${command}`)));
    process.stdout.write(`${mine.length > 0 ? `Usage:\n${mine.join('\n')}` : USAGE}\n`);
    return 0;
  }
  switch (command) {
    case 'serve':
      return serve(env);
    case 'ingest':
      return ingest(rest, env);
    case 'reindex':
      return reindex(rest, env);
    case 'eval':
      return runEvalCommand(rest, env);
    case 'model':
      return model(rest, env);
    case 'config':
      return printConfig(rest, env);
    case 'key':
      return keyCommand(rest);
    case 'backup':
      return backup(rest, env);
    case 'feedback':
      return runFeedbackCommand(rest, env);
    default:
      process.stderr.write(`sourcebound: unknown command "${command}"\n\n${USAGE}\n`);
      return 2;
  }
}

function config(env: Record<string, string | undefined>, overrides?: Record<string, unknown>): Readonly<Config> {
  return loadConfig({ env, ...(overrides ? { overrides } : {}) });
}

/** CLI commands log to stderr so that stdout carries only their result (e.g. --json). */
function cliLogger(cfg: Readonly<Config>, json: boolean): Logger {
  return createLogger(json && cfg.logLevel === 'info' ? 'warn' : cfg.logLevel, process.stderr as never);
}

async function serve(env: Record<string, string | undefined>): Promise<number> {
  const cfg = config(env);
  checkAuthConfig(cfg.auth, cfg.server.host);
  const logger = createLogger(cfg.logLevel);
  const rt = await createRuntime(cfg, logger);
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
  const { app, queue } = createServer(rt, { isReady: () => ready });
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
      process.exit(0);
    }
  };
  process.on('SIGTERM', () => void shutdown('SIGTERM'));
  process.on('SIGINT', () => void shutdown('SIGINT'));
  await app.listen({ host: cfg.server.host, port: cfg.server.port });
  try {
    await prepare(rt);
  } catch (err) {
    logger.fatal({ err }, 'start-up failed');
    await app.close();
    rt.close();
    return 1;
  }
  ready = true;
  const cols = rt.repo.listCollections();
  logger.info(
    { collections: cols.map((c) => ({ name: c.name, documents: c.documents, chunks: c.chunks })) },
    `ready on http://${cfg.server.host}:${(app.server.address() as { port: number }).port}`,
  );
  return new Promise<number>(() => undefined); // runs until a signal
}

/** Seeds an empty store with the demo folder, then loads (or rebuilds) every collection's vector index. */
async function prepare(rt: Runtime): Promise<void> {
  const { config: cfg, logger } = rt;
  if (cfg.seed.ingestOnEmpty && rt.repo.countDocuments() === 0) {
    logger.info({ path: cfg.seed.path, collection: cfg.seed.collection }, 'empty store: ingesting the seed folder');
    const s = await ingestAsJob(rt, 'ingest', cfg.seed.collection, { path: cfg.seed.path, reason: 'seed' }, () =>
      rt.ingestor.ingestPath(cfg.seed.path, { collection: cfg.seed.collection }),
    );
    logger.info({ documents: s.documents, chunks: s.chunks, seconds: s.seconds }, 'seed folder ingested');
  }
  for (const c of rt.repo.listCollections()) {
    if (c.embedderId && c.embedderId !== rt.embedder.id) {
      logger.error(
        { collection: c.name, indexedWith: c.embedderId, running: rt.embedder.id },
        'collection was indexed with another embedder: dense and hybrid search are refused until `sourcebound reindex --full`',
      );
      continue;
    }
    const r = rt.indexes.sync(c.name);
    logger.info({ collection: c.name, vectors: r.size, rebuilt: r.rebuilt }, 'vector index loaded');
  }
}

interface CommonFlags {
  collection?: string;
  full?: boolean;
  json?: boolean;
}

async function ingest(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const { values, positionals } = parseArgs({
    args,
    allowPositionals: true,
    options: { collection: { type: 'string', short: 'c' }, full: { type: 'boolean' }, json: { type: 'boolean' } },
  });
  const flags = values as CommonFlags;
  if (positionals.length === 0) {
    process.stderr.write('sourcebound ingest: give a folder or file to ingest\n');
    return 2;
  }
  const cfg = config(env);
  const collection = flags.collection ?? cfg.seed.collection;
  return withRuntime(cfg, flags.json ?? false, async (rt, progress) => {
    const total = emptySummary();
    for (const p of positionals) {
      const s = await ingestAsJob(rt, 'ingest', collection, { path: p }, () =>
        rt.ingestor.ingestPath(p, { collection, force: flags.full ?? false }),
      );
      addSummary(total, s);
    }
    progress.done();
    report(total, flags.json ?? false);
    return total.documents.failed > 0 ? 1 : 0;
  });
}

async function reindex(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const { values } = parseArgs({
    args,
    options: { collection: { type: 'string', short: 'c' }, full: { type: 'boolean' }, json: { type: 'boolean' } },
  });
  const flags = values as CommonFlags;
  const cfg = config(env);
  return withRuntime(cfg, flags.json ?? false, async (rt, progress) => {
    const opts: { collection?: string; full?: boolean } = { full: flags.full ?? false };
    if (flags.collection) opts.collection = flags.collection;
    const s = await ingestAsJob(rt, 'reindex', flags.collection ?? null, opts, () =>
      withReindexLock(cfg.dataDir, () => rt.ingestor.reindex(opts)),
    );
    progress.done();
    report(s, flags.json ?? false);
    return s.documents.failed > 0 ? 1 : 0;
  });
}

async function withRuntime(
  cfg: Readonly<Config>,
  json: boolean,
  fn: (rt: Runtime, progress: { done(): void }) => Promise<number>,
): Promise<number> {
  const logger = cliLogger(cfg, json);
  const tty = Boolean(process.stderr.isTTY) && !json;
  const started = performance.now();
  const onProgress = (p: IngestProgress): void => {
    if (!tty) return;
    // A pseudo-terminal with no size set reports 0 columns: treat it as unknown.
    const line = formatProgress(p, (performance.now() - started) / 1000, process.stderr.columns || 100);
    process.stderr.write(`\r\x1b[2K${line}`);
  };
  const rt = await createRuntime(cfg, logger, { onProgress });
  if (!rt.embedder.semantic && !json) process.stderr.write(`note: ${rt.embedderReason}\n`);
  try {
    return await fn(rt, { done: () => tty && process.stderr.write('\r\x1b[2K') });
  } finally {
    rt.close();
  }
}

function emptySummary(): IngestSummary {
  return {
    documents: { added: 0, updated: 0, renamed: 0, removed: 0, unchanged: 0, failed: 0 },
    chunks: { embedded: 0, reused: 0, removed: 0 },
    failures: [],
    skipped: [],
    seconds: 0,
  };
}

function addSummary(total: IngestSummary, s: IngestSummary): void {
  for (const k of Object.keys(total.documents) as (keyof IngestSummary['documents'])[]) total.documents[k] += s.documents[k];
  for (const k of Object.keys(total.chunks) as (keyof IngestSummary['chunks'])[]) total.chunks[k] += s.chunks[k];
  total.failures.push(...s.failures);
  total.skipped.push(...s.skipped);
  total.seconds = Math.round((total.seconds + s.seconds) * 1000) / 1000;
}

function report(s: IngestSummary, json: boolean): void {
  process.stdout.write(`${json ? summaryJson(s) : formatSummary(s)}\n`);
}

async function model(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const [sub, id] = args;
  const cfg = config(env);
  const modelId = id ?? cfg.embedding.model;
  if (sub === 'status') {
    const present = modelPresent(cfg.embedding.modelDir, modelId, cfg.embedding.quantized);
    process.stdout.write(
      present
        ? `model ${modelId} is present at ${modelPath(cfg.embedding.modelDir, modelId)}\n`
        : `model ${modelId} is not present under ${cfg.embedding.modelDir}; the service uses the built-in hashing embedder (not semantic)\n`,
    );
    return 0;
  }
  if (sub !== 'pull') {
    process.stderr.write('sourcebound model: use `model pull [<id>]` or `model status`\n');
    return 2;
  }
  const result = await pullModel({
    modelId,
    modelDir: cfg.embedding.modelDir,
    quantized: cfg.embedding.quantized,
    onProgress: (p) => {
      if (process.stderr.isTTY) process.stderr.write(`\r\x1b[2K${p.file} ${p.loaded ?? 0}/${p.total ?? '?'} bytes`);
    },
  });
  if (process.stderr.isTTY) process.stderr.write('\r\x1b[2K');
  process.stdout.write(`model ${modelId} saved to ${result.path} (${result.files.length} files)\n`);
  return 0;
}

async function keyCommand(args: string[]): Promise<number> {
  const [sub, ...rest] = args;
  if (sub !== 'new') {
    process.stderr.write('sourcebound key: use `key new [--id ID] [--scopes query,ingest,admin] [--collections C1,C2|*]`\n');
    return 2;
  }
  const { values } = parseArgs({
    args: rest,
    options: { id: { type: 'string' }, scopes: { type: 'string', default: 'query' }, collections: { type: 'string', default: '*' } },
  });
  const scopes = values.scopes!.split(',').map((s) => s.trim()).filter(Boolean);
  const bad = scopes.filter((s) => !['query', 'ingest', 'admin'].includes(s));
  if (bad.length > 0 || scopes.length === 0) {
    process.stderr.write(`sourcebound key new: unknown scope ${bad.join(', ')}; use query, ingest, admin\n`);
    return 2;
  }
  const key = newApiKey();
  const entry = {
    id: values.id ?? `key-${randomBytes(3).toString('hex')}`,
    sha256: sha256Hex(key),
    scopes,
    collections: values.collections!.split(',').map((s) => s.trim()).filter(Boolean),
  };
  process.stdout.write(
    `API key (shown once; give it to the client, it is not stored anywhere):\n  ${key}\n\n` +
      `Add this entry to auth.keys in your config file:\n${JSON.stringify(entry, null, 2)}\n`,
  );
  return 0;
}

async function backup(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const [dest] = args;
  if (!dest) {
    process.stderr.write('sourcebound backup: give the file to write, e.g. `sourcebound backup /backups/sourcebound-2026-12-02.db`\n');
    return 2;
  }
  const cfg = config(env);
  const { database } = storePaths(cfg.dataDir);
  if (!existsSync(database)) {
    process.stderr.write(`sourcebound backup: no database at ${database}\n`);
    return 1;
  }
  const store = openStore(database, { readonly: true });
  try {
    // A consistent snapshot even while the server writes.
    await store.backup(path.resolve(dest));
  } finally {
    store.close();
  }
  process.stdout.write(`database copied to ${path.resolve(dest)}; index files are rebuilt from it on start-up\n`);
  return 0;
}

async function printConfig(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const { values } = parseArgs({ args, options: { check: { type: 'boolean' }, reference: { type: 'boolean' } } });
  if (values.reference) {
    process.stdout.write(`${configReference()}\n`);
    return 0;
  }
  const cfg = config(env);
  if (values.check) {
    process.stdout.write('configuration is valid\n');
    return 0;
  }
  process.stdout.write(`${JSON.stringify(redactConfig(cfg), null, 2)}\n`);
  return 0;
}

// Run when executed directly (bin or `node dist/cli.js`), not when imported by tests.
const invokedDirectly = (() => {
  const entry = process.argv[1];
  if (!entry) return false;
  try {
    return import.meta.url === new URL(`file://${realpath(entry)}`).href;
  } catch {
    return false;
  }
})();

// npm's bin shim is a symlink: compare real paths.
function realpath(p: string): string {
  return realpathSync(p);
}

if (invokedDirectly) {
  main(process.argv.slice(2), process.env).then(
    (code) => {
      process.exitCode = code;
    },
    (err: unknown) => {
      if (err instanceof SourceboundError) process.stderr.write(`sourcebound: ${err.message}\n`);
      else process.stderr.write(`sourcebound: ${(err as Error)?.stack ?? String(err)}\n`);
      process.exitCode = 1;
    },
  );
}
