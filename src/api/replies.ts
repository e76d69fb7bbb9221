import { z } from 'zod';

// What the service replies, one schema per body: the OpenAPI description (openapi.ts) and the desk page's
// types (src/web/types.ts, type-only) come from here, and tests/api/openapi.test.ts checks real replies
// against them and the stages' types against them at compile time. Like schemas.ts, this file imports
// nothing but zod. Replies may gain fields: clients ignore what they do not know.

const isoTime = z.string().describe('an ISO 8601 time');
const count = z.number().int().min(0);

export const errorReply = z
  .object({
    error: z.object({
      code: z.string().describe('a code from docs/errors.md, e.g. SB_ERR_VALIDATION'),
      message: z.string(),
      details: z.unknown().describe('structured detail (zod issues for a validation error), or null'),
    }),
  })
  .describe('Every refusal and failure');

export const citation = z.object({
  n: z.number().int().min(1).describe('the number the answer cites as [n]'),
  documentId: z.string(),
  source: z.string(),
  title: z.string(),
  page: z.number().int().nullable().describe("the page of the quote's first character (PDF), else null"),
  section: z.string(),
  quote: z.string(),
  start: count.describe("the quote's span in the document's text"),
  end: count,
  effectiveDate: z.string().nullable(),
  version: z.string().nullable().optional().describe("the document's stated version or issue, when it states one"),
});

export const claim = z.object({
  text: z.string().describe('one answer sentence, without its citation markers'),
  sources: z.array(z.number().int()).describe('the citation numbers it cites'),
  supported: z.boolean(),
  support: z.number().min(0).max(1).describe("share of the sentence's content words found in its cited passages"),
  reason: z.enum(['citation', 'planted', 'overlap', 'figure', 'polarity']).optional().describe('the check an unsupported sentence failed'),
});

/** Where a passage stands: its document, and the pages and section it spans. */
const passageOf = {
  documentId: z.string(),
  source: z.string(),
  title: z.string(),
  page: z.number().int().nullable(),
  pageEnd: z.number().int().nullable(),
  section: z.string(),
  effectiveDate: z.string().nullable(),
};

/** A numbered context passage: the `sources` event of a streamed answer, and what an abstention offers. */
export const sourceSummary = z.object({ n: z.number().int().min(1), ...passageOf, version: z.string().nullable().optional(), text: z.string() });

/** POST /v1/answer: the JSON reply, and the `done` event of a streamed one. */
export const answerReply = z.object({
  answer: z.string(),
  abstained: z.boolean(),
  mode: z.enum(['generative', 'extractive']),
  citations: z.array(citation),
  claims: z.array(claim).optional(),
  confidence: z.number().min(0).max(1),
  confidenceCalibrated: z.boolean().optional(),
  confidenceError: z.number().min(0).max(1).optional().describe('how far a calibrated confidence was off on held-out corpora, at most'),
  evidence: z.number().optional(),
  caution: z.string().describe('show it near the answer'),
  fallbackReason: z.string().optional(),
  question: z.string().describe('the question answered: a follow-up rewritten to stand alone'),
  rewrittenBy: z.enum(['completion', 'key_terms']).optional(),
  abstainReason: z.string().optional(),
  timings: z.record(z.string(), z.number()).optional(),
});

/** The other events of a streamed answer (text/event-stream): `sources`, `delta`, `error`. */
export const sourcesEvent = z.object({ sources: z.array(sourceSummary) });
export const deltaEvent = z.object({ text: z.string(), reset: z.literal(true).optional(), citations: z.array(citation).optional() });
export const streamErrorEvent = z.object({ error: z.object({ code: z.string(), message: z.string() }) });

export const searchReply = z.object({
  results: z.array(
    z.object({ chunkId: z.number().int(), ...passageOf, version: z.string().nullable(), text: z.string(), score: z.number() }),
  ),
});

/** A cited span in its surrounding text: before + quote + after is an exact slice of the document. */
export const passage = z.object({
  documentId: z.string(),
  source: z.string(),
  title: z.string(),
  format: z.string(),
  effectiveDate: z.string().nullable(),
  section: z.string(),
  page: z.number().int().nullable(),
  pageEnd: z.number().int().nullable(),
  start: count,
  end: count,
  contextStart: count,
  contextEnd: count,
  before: z.string(),
  quote: z.string(),
  after: z.string(),
});

const queueHealth = z
  .object({
    state: z.enum(['idle', 'working', 'restarting', 'down']),
    pending: count,
    running: z.object({ id: z.string(), kind: z.string(), seconds: count }).nullable(),
    threadDeaths: count,
    lastThreadDeath: z.object({ at: z.string(), reason: z.string(), jobId: z.string().nullable() }).nullable(),
  })
  .describe('the job queue: its state, jobs pending, the running job, and deaths of the job thread (each one replaced)');
export const healthReply = z
  .looseObject({ status: z.enum(['ok', 'failing']), queue: queueHealth.optional() })
  .describe('plus the embedder and completion endpoint');
export const readyReply = z.object({ status: z.enum(['ready', 'loading']) });
export const collectionsReply = z.object({
  collections: z.array(z.object({ name: z.string(), documents: count, chunks: count, embedderId: z.string().nullable() })),
});

export const documentSummary = z.object({
  id: z.string(),
  source: z.string(),
  title: z.string(),
  format: z.string(),
  byteSize: count,
  pageCount: count.nullable(),
  effectiveDate: z.string().nullable(),
  contentHash: z.string(),
  chunks: count,
  metadata: z.record(z.string(), z.string()),
  updatedAt: isoTime,
});
export const documentList = z.object({ documents: z.array(documentSummary) });
export const uploadQueued = z.object({ status: z.literal('queued'), jobId: z.string(), source: z.string(), job: z.string().describe('the path to follow it at') });
export const uploadUnchanged = z.object({ status: z.literal('unchanged'), documentId: z.string(), source: z.string(), message: z.string() });
export const uploadDuplicate = z.object({
  status: z.literal('duplicate'),
  source: z.string().describe('the name this upload was sent under'),
  duplicateOf: z.object({ source: z.string(), jobId: z.string(), job: z.string().describe('the path to follow it at') }).describe('the upload of the same content that is being ingested'),
  message: z.string(),
});
export const failedUpload = z.object({
  name: z.string().describe('its name in uploads-failed/<collection>/: <job id>-<file name>'),
  jobId: z.string(),
  source: z.string().describe('the file name it was uploaded under'),
  bytes: z.number().int(),
  failedAt: z.string(),
  reason: z.string().nullable().describe("why its job failed (null when the job's record is gone)"),
});
export const failedUploadList = z.object({ failedUploads: z.array(failedUpload) });
export const failedUploadDeleted = z.object({ deleted: z.string() });
export const documentDeleted = z.object({ deleted: z.string(), chunksRemoved: count });
export const jobReply = z.object({
  id: z.string(),
  kind: z.string(),
  collection: z.string().nullable(),
  state: z.enum(['queued', 'running', 'succeeded', 'failed']),
  attempts: count,
  result: z.unknown(),
  error: z.string().nullable(),
  createdAt: isoTime,
  startedAt: isoTime.nullable(),
  finishedAt: isoTime.nullable(),
});
export const reindexQueued = z.object({ status: z.literal('queued'), jobId: z.string(), job: z.string() });
export const originalLink = z.object({ path: z.string().describe('GET it within a minute, with no key'), expiresAt: isoTime });
export const ratingSaved = z.object({ id: z.number().int(), createdAt: isoTime });
