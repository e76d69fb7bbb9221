// The connection pool to PostgreSQL (node-postgres). Only src/store/pg/ imports the driver.

import pg from 'pg';
import { SourceboundError } from '../../errors.js';

/** Column types read as numbers and ISO strings, as the SQLite back end hands them over. */
const INT8 = 20;
const TIMESTAMPTZ = 1184;
const parseTimestamp = pg.types.getTypeParser(TIMESTAMPTZ) as (v: string) => Date;

const typeParsers = {
  // bigint ids and counts: well inside 2^53 (a chunk id would need 9e15 inserts), so a number, not a string.
  getTypeParser: ((oid: number, format?: 'text' | 'binary') => {
    if (oid === INT8) return (v: string) => Number(v);
    if (oid === TIMESTAMPTZ) return (v: string) => parseTimestamp(v).toISOString();
    return pg.types.getTypeParser(oid, format ?? 'text');
  }) as typeof pg.types.getTypeParser,
};

export type PgPool = pg.Pool;
export type PgClient = pg.PoolClient;
/** A connection of its own, outside the pool (the change listener's). */
export type PgSession = pg.Client;

/** An unconnected single connection to `url` (for LISTEN, which needs a connection no one else uses). */
export function newSession(url: string, connectTimeoutMs: number): PgSession {
  return new pg.Client({ connectionString: url, connectionTimeoutMillis: connectTimeoutMs, types: typeParsers });
}

export interface PgConnectOptions {
  /** Most connections the pool opens. */
  max?: number;
  /** How long a connection attempt may take before it fails. */
  connectTimeoutMs?: number;
}

/** Parses the URL (postgres:// or postgresql://) without connecting; throws SB_ERR_DATABASE_UNUSABLE naming the problem. */
export function checkDatabaseUrl(url: string): URL {
  let parsed: URL;
  try {
    parsed = new URL(url);
  } catch {
    throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', ['SOURCEBOUND_DATABASE_URL is not a URL (expected postgres://user@host:port/database)']);
  }
  if (parsed.protocol !== 'postgres:' && parsed.protocol !== 'postgresql:') {
    throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [`SOURCEBOUND_DATABASE_URL has scheme "${parsed.protocol}"; expected postgres: or postgresql:`]);
  }
  if (parsed.pathname.length <= 1) {
    throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', ['SOURCEBOUND_DATABASE_URL names no database (expected postgres://user@host:port/database)']);
  }
  return parsed;
}

/** The URL with its password replaced, for messages and logs. */
export function redactDatabaseUrl(url: string): string {
  try {
    const u = new URL(url);
    if (u.password) u.password = 'redacted';
    return u.toString();
  } catch {
    return '(unparsable URL)';
  }
}

/** A pool over the database; `verify` opens one connection first, so an unreachable server fails here, clearly. */
export async function connectPool(url: string, opts: PgConnectOptions = {}): Promise<PgPool> {
  checkDatabaseUrl(url);
  const pool = new pg.Pool({
    connectionString: url,
    max: opts.max ?? 10,
    connectionTimeoutMillis: opts.connectTimeoutMs ?? 10_000,
    types: typeParsers,
  });
  // An idle connection the server drops (a restart) must not crash the process: the pool replaces it.
  pool.on('error', () => {});
  try {
    const client = await pool.connect();
    client.release();
  } catch (err) {
    await pool.end().catch(() => {});
    throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [`cannot connect to ${redactDatabaseUrl(url)}: ${(err as Error).message}`]);
  }
  return pool;
}

/** Runs `fn` in one transaction on one connection of the pool: committed when it returns, rolled back when it throws. */
export async function inTransaction<T>(pool: PgPool, fn: (client: PgClient) => Promise<T>): Promise<T> {
  const client = await pool.connect();
  // A connection whose ROLLBACK failed is in an unknown state: it is closed, not handed back to the pool.
  let broken: Error | undefined;
  try {
    await client.query('BEGIN');
    const out = await fn(client);
    await client.query('COMMIT');
    return out;
  } catch (err) {
    await client.query('ROLLBACK').catch((e: unknown) => {
      broken = e as Error;
    });
    throw err;
  } finally {
    client.release(broken);
  }
}
