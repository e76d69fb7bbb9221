export { createJobQueue, requeueAbandoned, claimNext, runOne, type JobQueue } from './queue.js';
export { executeJob, type JobPayload } from './execute.js';
export { withReindexLock } from './lock.js';
export { createDocumentService, checkFileName, type DocumentService, type DocumentSummary, type UploadOutcome } from './documents.js';
