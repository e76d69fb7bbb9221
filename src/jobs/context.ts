import type { Ingestor } from '../ingest/index.js';
import type { JobOwner, JobStore, LeaseStore, Originals, Repository, VectorIndexes } from '../store/index.js';

/** What running jobs and the document API use: handed over by the composition root (src/runtime.ts). */
export interface JobContext {
  /** The data folder: uploads are kept under it. */
  dataDir: string;
  /** Largest upload accepted, in bytes. */
  maxUploadBytes: number;
  store: Pick<
    Repository,
    | 'ensureCollection'
    | 'getCollection'
    | 'addSourceRoot'
    | 'getDocument'
    | 'getDocumentBySource'
    | 'listDocuments'
    | 'deleteDocument'
    | 'findDocumentByContent'
    | 'countChunks'
    | 'collectionState'
  > & { jobs: JobStore; leases: LeaseStore };
  ingestor: Pick<Ingestor, 'ingestPath' | 'reindex'>;
  indexes: Pick<VectorIndexes, 'sync' | 'apply' | 'settled'>;
  /** Uploaded originals kept by content hash (src/store/originals.ts). */
  originals: Originals;
  /** This process, as the holder of the jobs it runs. */
  owner: JobOwner;
  /** How long a job's or the re-index lock's lease lasts without a heartbeat (`limits.jobLeaseSeconds`). */
  leaseMs: number;
}
