// Versioned schema for PostgreSQL. Each entry runs once, in order, in a transaction of its own together with
// the row that records it in `schema_versions`. Every migrator first takes a session-level advisory lock, so of
// two processes starting at once one migrates while the other waits, then finds nothing left to do.
// Never edit a shipped migration: add a new one.

import { SourceboundError } from '../../errors.js';
import type { PgClient, PgPool } from './connect.js';

export type PgMigration = string | ((client: PgClient) => Promise<void>);

/**
 * The advisory lock key every migrator takes: a fixed 64-bit number ("sb-migr" in ASCII), chosen so it cannot
 * meet the transaction-level lock of the change log (CHANGE_LOG_LOCK in corpus.ts).
 */
export const MIGRATION_LOCK = 0x73622d6d696772n;

export const PG_MIGRATIONS: readonly PgMigration[] = [
  // 1: the initial schema
  `
  CREATE TABLE collections (
    name text PRIMARY KEY,
    embedder_id text,
    dimensions integer,
    -- bumped on every change to the collection's chunks; index files record the generation they hold
    generation bigint NOT NULL DEFAULT 0,
    document_count integer NOT NULL DEFAULT 0,
    chunk_count integer NOT NULL DEFAULT 0,
    created_at timestamptz NOT NULL DEFAULT now()
  );

  CREATE TABLE sources (
    collection text NOT NULL REFERENCES collections(name) ON DELETE CASCADE,
    root text NOT NULL,
    added_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (collection, root)
  );

  CREATE TABLE documents (
    id text PRIMARY KEY,
    collection text NOT NULL REFERENCES collections(name) ON DELETE CASCADE,
    source text NOT NULL,
    root text,
    title text NOT NULL,
    format text NOT NULL,
    content_hash text NOT NULL,
    byte_size bigint NOT NULL,
    page_count integer,
    effective_date text,
    metadata jsonb NOT NULL DEFAULT '{}',
    text text NOT NULL,
    settings_key text NOT NULL,
    -- 1 when first stored, one more on each replacement
    version integer NOT NULL DEFAULT 1,
    created_at timestamptz NOT NULL DEFAULT now(),
    updated_at timestamptz NOT NULL DEFAULT now(),
    UNIQUE (collection, source)
  );
  CREATE INDEX documents_by_content ON documents (collection, content_hash);
  -- metadata filters ({"key": "value"} containment)
  CREATE INDEX documents_by_metadata ON documents USING gin (metadata jsonb_path_ops);

  -- What each version of a document was: its bytes' hash and the settings its chunks were made with.
  CREATE TABLE document_versions (
    document_id text NOT NULL REFERENCES documents(id) ON DELETE CASCADE,
    version integer NOT NULL,
    content_hash text NOT NULL,
    settings_key text NOT NULL,
    chunk_count integer NOT NULL,
    stored_at timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (document_id, version)
  );

  -- Chunk ids are HNSW labels: an identity column never hands one out twice, even after a rollback.
  CREATE TABLE chunks (
    id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    document_id text NOT NULL REFERENCES documents(id) ON DELETE CASCADE,
    ordinal integer NOT NULL,
    text text NOT NULL,
    start_offset integer NOT NULL,
    end_offset integer NOT NULL,
    heading_path jsonb NOT NULL DEFAULT '[]',
    page_start integer,
    page_end integer,
    -- [[document offset, page], ...] of pages that begin inside the chunk; NULL when it sits on one page
    page_breaks jsonb,
    token_count integer NOT NULL,
    -- sha256 of the text that was embedded: the vector cache key
    chunk_hash text NOT NULL,
    metadata jsonb NOT NULL DEFAULT '{}',
    CHECK (0 <= start_offset AND start_offset <= end_offset)
  );
  CREATE INDEX chunks_by_document ON chunks (document_id, ordinal);

  -- float32 little-endian, as the SQLite back end stores them, so a vector moves between back ends byte for byte
  CREATE TABLE vectors (
    model_id text NOT NULL,
    chunk_hash text NOT NULL,
    dimensions integer NOT NULL,
    vector bytea NOT NULL,
    PRIMARY KEY (model_id, chunk_hash),
    CHECK (octet_length(vector) = 4 * dimensions)
  );

  CREATE TABLE jobs (
    id text PRIMARY KEY,
    kind text NOT NULL,
    collection text,
    state text NOT NULL CHECK (state IN ('queued', 'running', 'succeeded', 'failed')),
    attempts integer NOT NULL DEFAULT 0,
    payload jsonb NOT NULL DEFAULT '{}',
    result jsonb,
    error text,
    created_at timestamptz NOT NULL DEFAULT clock_timestamp(),
    started_at timestamptz,
    finished_at timestamptz,
    -- the lease of a running job: who holds it, their last heartbeat, and when it counts as abandoned
    lease_holder text,
    owner_pid integer,
    owner_host text,
    heartbeat_at timestamptz,
    lease_expires_at timestamptz
  );
  CREATE INDEX jobs_by_state ON jobs (state, created_at);
  CREATE INDEX jobs_by_holder ON jobs (lease_holder) WHERE state = 'running';

  CREATE TABLE leases (
    name text PRIMARY KEY,
    holder text NOT NULL,
    pid integer NOT NULL,
    host text NOT NULL,
    acquired_at timestamptz NOT NULL,
    heartbeat_at timestamptz NOT NULL,
    expires_at timestamptz NOT NULL
  );

  CREATE TABLE answer_ratings (
    id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    collection text NOT NULL,
    key_id text,
    question text NOT NULL,
    answered_question text,
    history jsonb NOT NULL DEFAULT '[]',
    answer text NOT NULL,
    abstained boolean NOT NULL,
    sources jsonb NOT NULL DEFAULT '[]',
    helpful boolean NOT NULL,
    comment text,
    created_at timestamptz NOT NULL DEFAULT now()
  );
  CREATE INDEX answer_ratings_by_collection ON answer_ratings (collection, created_at);

  -- The ordered change log the API nodes follow to keep their in-memory indexes current. Written in the
  -- transaction of the change it records, after the transaction-level advisory lock that orders writers
  -- (corpus.ts), so positions become visible in order and a reader never skips one.
  CREATE TABLE change_log (
    position bigserial PRIMARY KEY,
    collection text NOT NULL,
    kind text NOT NULL CHECK (kind IN ('collection-created', 'chunk-added', 'chunk-removed')),
    document_id text,
    chunk_id bigint,
    generation bigint NOT NULL,
    logged_at timestamptz NOT NULL DEFAULT now()
  );
  `,
  // 2: the database's identity, made once when it is created. An API node's local snapshot records the
  // identity of the database it follows, so a snapshot taken from another database (a restored copy, a test
  // database of the same name) is never mistaken for a head start on this one.
  `
  CREATE TABLE system_identity (
    id uuid PRIMARY KEY DEFAULT gen_random_uuid(),
    created_at timestamptz NOT NULL DEFAULT now()
  );
  INSERT INTO system_identity DEFAULT VALUES;
  `,
];

export interface MigrationReport {
  /** The version the database was at when this migrator got the lock. */
  from: number;
  /** The version it is at now. */
  to: number;
  /** The versions this migrator applied (none when another had already done them). */
  applied: number[];
}

/** The version a database is at (0 for a database never migrated). */
export async function pgSchemaVersion(client: PgClient | PgPool): Promise<number> {
  const exists = await client.query<{ t: string | null }>("SELECT to_regclass('schema_versions') AS t");
  if (!exists.rows[0]?.t) return 0;
  const r = await client.query<{ v: number | null }>('SELECT max(version) AS v FROM schema_versions');
  return r.rows[0]?.v ?? 0;
}

/**
 * Brings the database to the latest version under the migration lock. A database at a version newer than
 * `migrations` knows is refused (a later release migrated it): running against it could misread its rows.
 */
export async function migratePg(pool: PgPool, migrations: readonly PgMigration[] = PG_MIGRATIONS): Promise<MigrationReport> {
  const client = await pool.connect();
  let broken: Error | undefined;
  try {
    // Session-level: held across the per-migration transactions below, released in `finally`.
    await client.query('SELECT pg_advisory_lock($1)', [MIGRATION_LOCK.toString()]);
    try {
      await client.query(`CREATE TABLE IF NOT EXISTS schema_versions (
        version integer PRIMARY KEY,
        applied_at timestamptz NOT NULL DEFAULT now()
      )`);
      const from = await pgSchemaVersion(client);
      if (from > migrations.length) {
        throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [
          `its schema is at version ${from}, newer than the ${migrations.length} this release knows`,
        ]);
      }
      const applied: number[] = [];
      for (let v = from + 1; v <= migrations.length; v++) {
        const m = migrations[v - 1]!;
        await client.query('BEGIN');
        try {
          if (typeof m === 'string') await client.query(m);
          else await m(client);
          await client.query('INSERT INTO schema_versions (version) VALUES ($1)', [v]);
          await client.query('COMMIT');
        } catch (err) {
          await client.query('ROLLBACK').catch((e: unknown) => {
            broken = e as Error;
          });
          throw err;
        }
        applied.push(v);
      }
      return { from, to: migrations.length, applied };
    } finally {
      if (!broken) await client.query('SELECT pg_advisory_unlock($1)', [MIGRATION_LOCK.toString()]).catch((e: unknown) => {
        broken = e as Error;
      });
    }
  } finally {
    // A connection that could not be cleaned up is closed, which also drops its session lock.
    client.release(broken);
  }
}
