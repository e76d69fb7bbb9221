export {
  createJobQueue,
  requeueAbandoned,
  claimNext,
  heartbeatMs,
  runOne,
  type JobQueue,
  type JobThread,
  type QueueHealth,
  type ToJobThread,
  type FromJobThread,
} from './queue.js';
export { executeJob, JobFailed, type JobPayload } from './execute.js';
export { withReindexLock, REINDEX_LEASE, type LeaseDeps } from './lock.js';
export { thisProcess, ownerGone, abandonedReason } from './owner.js';
export type { JobContext } from './context.js';
export { createDocumentService, checkFileName, type DocumentService, type LocalDocumentService, type DocumentSummary, type UploadOutcome } from './documents.js';
export { failedUploadsDir, type FailedUpload } from './set-aside.js';
export { removeStaleIncoming, receiveUpload, uploadsDir, INCOMING_PREFIX } from './incoming.js';
export { createSharedDocumentService, enqueueReindex, sharedPaths, type SharedDocumentDeps } from './shared-documents.js';
export { createSharedWorker, type SharedWorker, type SharedWorkerDeps } from './shared-worker.js';
