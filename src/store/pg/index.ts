export { openPgSystemOfRecord, type PgSystemOfRecord } from './store.js';
export { migratePg, pgSchemaVersion, PG_MIGRATIONS, MIGRATION_LOCK, type PgMigration, type MigrationReport } from './migrations.js';
export { connectPool, checkDatabaseUrl, redactDatabaseUrl, inTransaction, type PgPool, type PgClient, type PgConnectOptions } from './connect.js';
export { CHANGE_LOG_LOCK, CHANGE_CHANNEL, type PgChunkInput } from './corpus.js';
