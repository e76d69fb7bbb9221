export { openDatabase, migrate, schemaVersion, type Db } from './db.js';
export { MIGRATIONS } from './migrations.js';
export {
  createRepository,
  shadowCollectionName,
  SHADOW_PREFIX,
  vectorToBlob,
  blobToVector,
  type Repository,
  type CollectionRow,
  type DocumentRecord,
  type DocumentKey,
  type ChunkInput,
  type ChunkRecord,
  type ChunkView,
  type NewDocument,
  type FtsRow,
  type FtsWeights,
} from './repository.js';
export { createVectorIndexes, type VectorIndexes, type VectorHit, type HnswParams } from './hnsw-index.js';
export { createJobs, type Jobs, type JobRecord, type JobState } from './jobs.js';
export { storePaths } from './paths.js';
