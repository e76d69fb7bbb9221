import { existsSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import type { z } from 'zod';
import { SourceboundError } from '../errors.js';
import { configSchema, SECRET_PATHS, type Config } from './schema.js';

/** The package root (where config/ and seed-docs/ live), whether running from src/ or dist/. */
export const PACKAGE_ROOT = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..', '..');

type Env = Record<string, string | undefined>;

interface EnvBinding {
  name: string;
  path: string[];
  kind: 'string' | 'int' | 'bool';
}

// The only place environment variables are read. Each maps onto one config key.
export const ENV_BINDINGS: readonly EnvBinding[] = [
  { name: 'PORT', path: ['server', 'port'], kind: 'int' },
  { name: 'HOST', path: ['server', 'host'], kind: 'string' },
  { name: 'SOURCEBOUND_DATA_DIR', path: ['dataDir'], kind: 'string' },
  { name: 'SOURCEBOUND_LOG_LEVEL', path: ['logLevel'], kind: 'string' },
  { name: 'SOURCEBOUND_LOG_FORMAT', path: ['logFormat'], kind: 'string' },
  { name: 'SOURCEBOUND_EMBEDDER', path: ['embedding', 'provider'], kind: 'string' },
  { name: 'SOURCEBOUND_MODEL', path: ['embedding', 'model'], kind: 'string' },
  { name: 'SOURCEBOUND_MODEL_DIR', path: ['embedding', 'modelDir'], kind: 'string' },
  { name: 'SOURCEBOUND_SEED_DIR', path: ['seed', 'path'], kind: 'string' },
  { name: 'SOURCEBOUND_COMPLETION_URL', path: ['completion', 'baseUrl'], kind: 'string' },
  { name: 'SOURCEBOUND_COMPLETION_MODEL', path: ['completion', 'model'], kind: 'string' },
  { name: 'SOURCEBOUND_COMPLETION_API_KEY', path: ['completion', 'apiKey'], kind: 'string' },
  { name: 'SOURCEBOUND_DATABASE_URL', path: ['storage', 'databaseUrl'], kind: 'string' },
  { name: 'SOURCEBOUND_SHARED_DIR', path: ['storage', 'sharedDir'], kind: 'string' },
];

export interface LoadConfigOptions {
  env?: Env;
  /** Extra config object merged last (tests, CLI flags). */
  overrides?: Record<string, unknown>;
  /** Directory relative paths are resolved against (default: process.cwd()). */
  cwd?: string;
  /** Skip config/default.json (tests that want schema defaults only). */
  defaultsFile?: string | null;
}

/**
 * Builds the effective configuration: config/default.json, then the file named by SOURCEBOUND_CONFIG,
 * then environment variables, then `overrides`. Fails with every problem listed, each naming its key.
 */
export function loadConfig(opts: LoadConfigOptions = {}): Readonly<Config> {
  const env = opts.env ?? {};
  const cwd = opts.cwd ?? process.cwd();
  const layers: Record<string, unknown>[] = [];
  const defaultsFile =
    opts.defaultsFile === undefined ? path.join(PACKAGE_ROOT, 'config', 'default.json') : opts.defaultsFile;
  if (defaultsFile) layers.push(readJsonFile(defaultsFile));
  const named = env.SOURCEBOUND_CONFIG;
  if (named) layers.push(readJsonFile(path.resolve(cwd, named)));
  const envLayer: Record<string, unknown> = {};
  const problems: string[] = [];
  for (const b of ENV_BINDINGS) {
    const raw = env[b.name];
    if (raw === undefined || raw === '') continue;
    let value: unknown = raw;
    if (b.kind === 'int') {
      value = /^-?\d+$/.test(raw.trim()) ? Number(raw) : NaN;
      if (Number.isNaN(value)) problems.push(`${b.name} (${b.path.join('.')}): expected an integer, got "${raw}"`);
    } else if (b.kind === 'bool') {
      value = raw === 'true' || raw === '1';
    }
    setPath(envLayer, b.path, value);
  }
  layers.push(envLayer);
  if (opts.overrides) layers.push(opts.overrides);
  if (problems.length > 0) throw configError(problems);

  const merged = layers.reduce<Record<string, unknown>>((acc, l) => deepMerge(acc, l), {});
  const parsed = configSchema.safeParse(merged);
  if (!parsed.success) throw configError(formatIssues(parsed.error.issues));
  const config = parsed.data;
  config.dataDir = path.resolve(cwd, config.dataDir);
  config.embedding.modelDir = path.resolve(cwd, config.embedding.modelDir);
  if (config.storage.sharedDir !== null) config.storage.sharedDir = path.resolve(cwd, config.storage.sharedDir);
  // The demo folder ships with the installation: a relative seed path that is not found under the
  // working directory is looked up in the package root, so `npx sourcebound serve` works from anywhere.
  const seedHere = path.resolve(cwd, config.seed.path);
  config.seed.path =
    existsSync(seedHere) || path.isAbsolute(config.seed.path) ? seedHere : path.resolve(PACKAGE_ROOT, config.seed.path);
  config.chunking.targetTokens = Math.min(config.chunking.targetTokens, config.chunking.maxTokens);
  return deepFreeze(config);
}

export function formatIssues(issues: readonly z.core.$ZodIssue[]): string[] {
  return issues.map((i) => {
    const where = i.path.length > 0 ? i.path.join('.') : '(top level)';
    if (i.code === 'unrecognized_keys') {
      return `${where}: unknown key${i.keys.length > 1 ? 's' : ''} ${i.keys.map((k) => `"${k}"`).join(', ')}`;
    }
    return `${where}: ${i.message}`;
  });
}

/** The effective config as printable JSON, secrets replaced. */
export function redactConfig(config: Readonly<Config>): Record<string, unknown> {
  const copy = JSON.parse(JSON.stringify(config)) as Record<string, unknown>;
  for (const p of SECRET_PATHS) {
    const parts = p.split('.');
    let node: Record<string, unknown> | undefined = copy;
    for (const part of parts.slice(0, -1)) node = node?.[part] as Record<string, unknown> | undefined;
    const last = parts[parts.length - 1]!;
    if (node && node[last] !== null && node[last] !== undefined) node[last] = '[redacted]';
  }
  return copy;
}

function configError(problems: string[]): SourceboundError {
  return new SourceboundError('SB_ERR_CONFIG_INVALID', [problems.map((p) => `  - ${p}`).join('\n')], { problems });
}

function readJsonFile(file: string): Record<string, unknown> {
  let text: string;
  try {
    text = readFileSync(file, 'utf8');
  } catch (err) {
    throw configError([`cannot read config file ${file}: ${(err as Error).message}`]);
  }
  try {
    const v: unknown = JSON.parse(text);
    if (v === null || typeof v !== 'object' || Array.isArray(v)) throw new Error('top level must be an object');
    return v as Record<string, unknown>;
  } catch (err) {
    throw configError([`config file ${file} is not valid JSON: ${(err as Error).message}`]);
  }
}

function setPath(target: Record<string, unknown>, keys: string[], value: unknown): void {
  let node = target;
  for (const k of keys.slice(0, -1)) {
    if (typeof node[k] !== 'object' || node[k] === null) node[k] = {};
    node = node[k] as Record<string, unknown>;
  }
  node[keys[keys.length - 1]!] = value;
}

function isPlainObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

function deepMerge(a: Record<string, unknown>, b: Record<string, unknown>): Record<string, unknown> {
  const out: Record<string, unknown> = { ...a };
  for (const [k, v] of Object.entries(b)) {
    out[k] = isPlainObject(v) && isPlainObject(out[k]) ? deepMerge(out[k] as Record<string, unknown>, v) : v;
  }
  return out;
}

function deepFreeze<T>(o: T): T {
  if (o && typeof o === 'object') {
    for (const v of Object.values(o)) deepFreeze(v);
    Object.freeze(o);
  }
  return o;
}
