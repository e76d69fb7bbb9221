export {
  createIngestor,
  type Ingestor,
  type IngestOptions,
  type IngestProgress,
  type IngestSummary,
  type FileOutcome,
} from './pipeline.js';
export { documentId } from './files.js';
export { addInto, emptySummary } from './summary.js';
export { formatProgress, formatSummary, summaryJson } from './progress.js';
export { loadDocument } from './load.js';
export { detectFormat } from './detect.js';
export { buildNormalisedDocument, normaliseText } from './normalise.js';
export { chunkDocument } from './chunk.js';
export { splitSentences } from './sentences.js';
export { findEffectiveDate } from './effective-date.js';
export { DEFAULT_DOCUMENT_LIMITS, LimitExceeded, type DocumentLimits } from './budget.js';
