import type { Ingestor } from '../ingest/index.js';
import type { JobOwner, JobStore, Repository, VectorIndexes } from '../store/index.js';

/** What running jobs and the document API use: handed over by the composition root (src/runtime.ts). */
export interface JobContext {
  /** The data folder: uploads are kept under it, and the re-index lock file sits in it. */
  dataDir: string;
  /** Largest upload accepted, in bytes. */
  maxUploadBytes: number;
  store: Pick<
    Repository,
    'ensureCollection' | 'getCollection' | 'addSourceRoot' | 'getDocument' | 'listDocuments' | 'deleteDocument' | 'findDocumentByContent' | 'countChunks' | 'collectionState'
  > & { jobs: JobStore };
  ingestor: Pick<Ingestor, 'ingestPath' | 'reindex'>;
  indexes: Pick<VectorIndexes, 'sync' | 'apply'>;
  /** This process, as the holder of the jobs it runs. */
  owner: JobOwner;
}
