export type * from './types.js';
export { SHADOW_PREFIX, shadowCollectionName } from './types.js';
export { SqliteStore, openStore } from './sqlite/store.js';
export { openDatabase, migrate, schemaVersion, type Db } from './sqlite/db.js';
export { MIGRATIONS, runMigration, type Migration } from './sqlite/migrations.js';
export { ftsColumns } from './fts-columns.js';
export { createVectorIndexes, type VectorIndexes, type VectorHit, type HnswParams } from './hnsw-index.js';
export { storePaths } from './paths.js';
export { createOriginals, type Originals } from './originals.js';
