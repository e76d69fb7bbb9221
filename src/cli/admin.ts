// The operator's small commands: model pull|status, key new, backup, config.

import { randomBytes } from 'node:crypto';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { newApiKey, sha256Hex } from '../api/auth.js';
import { configReference, redactConfig } from '../config/index.js';
import { modelPath, modelPresent, pullModel } from '../embed/index.js';
import { openStore, storePaths } from '../store/index.js';
import { CliError, EXIT, usageError, type CliContext } from './context.js';
import { commaList } from './options.js';

export function modelStatus(ctx: CliContext, id: string | undefined): number {
  const cfg = ctx.config();
  const modelId = id ?? cfg.embedding.model;
  const present = modelPresent(cfg.embedding.modelDir, modelId, cfg.embedding.quantized);
  ctx.io.out(
    present
      ? `model ${modelId} is present at ${modelPath(cfg.embedding.modelDir, modelId)}\n`
      : `model ${modelId} is not present under ${cfg.embedding.modelDir}; the service uses the built-in hashing embedder (not semantic)\n`,
  );
  return EXIT.ok;
}

export async function modelPull(ctx: CliContext, id: string | undefined): Promise<number> {
  const cfg = ctx.config();
  const modelId = id ?? cfg.embedding.model;
  const { io } = ctx;
  const result = await pullModel({
    modelId,
    modelDir: cfg.embedding.modelDir,
    quantized: cfg.embedding.quantized,
    onProgress: (p) => {
      if (io.errIsTTY) io.err(`\r\x1b[2K${p.file} ${p.loaded ?? 0}/${p.total ?? '?'} bytes`);
    },
  });
  if (io.errIsTTY) io.err('\r\x1b[2K');
  io.out(`model ${modelId} saved to ${result.path} (${result.files.length} files)\n`);
  return EXIT.ok;
}

export const SCOPES = ['query', 'ingest', 'admin'] as const;

export function keyNew(ctx: CliContext, opts: { id?: string; scopes: string; collections: string }): number {
  const scopes = commaList(opts.scopes);
  const bad = scopes.filter((s) => !(SCOPES as readonly string[]).includes(s));
  if (bad.length > 0 || scopes.length === 0) throw usageError(`unknown scope ${bad.join(', ')}; use ${SCOPES.join(', ')}`);
  const key = newApiKey();
  const entry = {
    id: opts.id ?? `key-${randomBytes(3).toString('hex')}`,
    sha256: sha256Hex(key),
    scopes,
    collections: commaList(opts.collections),
  };
  ctx.io.out(
    `API key (shown once; give it to the client, it is not stored anywhere):\n  ${key}\n\n` +
      `Add this entry to auth.keys in your config file:\n${JSON.stringify(entry, null, 2)}\n`,
  );
  return EXIT.ok;
}

export async function backup(ctx: CliContext, dest: string): Promise<number> {
  const cfg = ctx.config();
  const { database } = storePaths(cfg.dataDir);
  if (!existsSync(database)) throw new CliError(`no database at ${database}`);
  const store = openStore(database, { readonly: true });
  try {
    // A consistent snapshot even while the server writes.
    await store.backup(path.resolve(dest));
  } finally {
    store.close();
  }
  ctx.io.out(`database copied to ${path.resolve(dest)}; index files are rebuilt from it on start-up\n`);
  return EXIT.ok;
}

export function printConfig(ctx: CliContext, opts: { check?: boolean; reference?: boolean }): number {
  if (opts.reference) {
    ctx.io.out(`${configReference()}\n`);
    return EXIT.ok;
  }
  const cfg = ctx.config();
  ctx.io.out(opts.check ? 'configuration is valid\n' : `${JSON.stringify(redactConfig(cfg), null, 2)}\n`);
  return EXIT.ok;
}
