import { z } from 'zod';

// One schema per request body and query: validation, TypeScript types and the OpenAPI description
// (src/api/openapi.ts) all come from here; the replies' schemas are in replies.ts. This file imports
// nothing but zod: the desk page takes its types from it (type-only, so the page carries no zod).

/** The one rule for collection names, in the API and on the command line (src/cli/options.ts). */
export const COLLECTION_NAME = /^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$/;
export const COLLECTION_NAME_RULE = 'a collection name is 1-64 letters, digits, ".", "_" or "-", starting with a letter or digit';

export const collectionName = z.string().regex(COLLECTION_NAME, COLLECTION_NAME_RULE);

export const searchMode = z.enum(['hybrid', 'lexical', 'dense']);

/** Narrows a search or an answer to some documents: by id, and/or by exact values of their metadata. */
export const searchFilter = z
  .object({
    documentIds: z.array(z.string().min(1).max(64)).min(1).max(1000).optional(),
    metadata: z
      .record(z.string().min(1).max(64), z.string().max(500))
      .refine((m) => Object.keys(m).length <= 20, 'at most 20 metadata keys')
      .optional(),
  })
  .strict();

export function searchBody(limits: { questionMaxChars: number; kMax: number }) {
  return z
    .object({
      query: z.string().trim().min(1, 'query must not be empty').max(limits.questionMaxChars),
      collection: collectionName.optional(),
      k: z.number().int().min(1).max(limits.kMax).optional(),
      mode: searchMode.optional(),
      filter: searchFilter.optional(),
    })
    .strict();
}

export const historyTurn = z
  .object({
    role: z.enum(['user', 'assistant']),
    content: z.string().max(20_000),
  })
  .strict();

export function answerBody(limits: { questionMaxChars: number; kMax: number; historyMaxTurns: number }) {
  return z
    .object({
      question: z.string().trim().min(1, 'question must not be empty').max(limits.questionMaxChars),
      collection: collectionName.optional(),
      history: z.array(historyTurn).max(limits.historyMaxTurns).optional(),
      k: z.number().int().min(1).max(limits.kMax).optional(),
      // Either a retrieval mode, or the answer style: "extractive" skips the completion endpoint.
      mode: z.enum(['hybrid', 'lexical', 'dense', 'auto', 'generative', 'extractive']).optional(),
      retrieval: searchMode.optional(),
      filter: searchFilter.optional(),
      // Server-sent events (sources, delta, done) instead of one JSON reply.
      stream: z.boolean().optional(),
    })
    .strict();
}

/** A text document sent as JSON (files of any allowed type go as multipart). */
export const textUpload = z
  .object({
    name: z.string().min(1).max(200),
    text: z.string().min(1, 'text must not be empty'),
    metadata: z.record(z.string().regex(/^[A-Za-z][A-Za-z0-9_-]{0,40}$/), z.string().max(500)).optional(),
  })
  .strict();

export const reindexBody = z.object({ collection: collectionName.optional(), full: z.boolean().optional() }).strict();

const offset = z.coerce.number().int().min(0).max(2 ** 31);
/** The span of a passage, in characters of the document's text. */
export const passageQuery = z.object({ start: offset, end: offset }).strict();

// What a client sends of each citation; other citation fields are accepted and dropped.
export const ratedSource = z.object({
  n: z.number().int().min(1).max(1000),
  documentId: z.string().min(1).max(200),
  source: z.string().max(1000),
  title: z.string().max(1000),
  page: z.number().int().min(1).nullable(),
  section: z.string().max(2000),
  quote: z.string().max(10_000),
});

export function ratingBody(limits: { questionMaxChars: number; historyMaxTurns: number }) {
  return z
    .object({
      collection: collectionName.optional(),
      question: z.string().trim().min(1, 'question must not be empty').max(limits.questionMaxChars),
      answeredQuestion: z.string().trim().max(limits.questionMaxChars).optional(),
      history: z.array(historyTurn).max(limits.historyMaxTurns).optional(),
      answer: z.string().max(20_000),
      abstained: z.boolean(),
      sources: z.array(ratedSource).max(100).optional(),
      helpful: z.boolean(),
      comment: z.string().trim().max(2_000).optional(),
    })
    .strict();
}

export type SearchBody = z.infer<ReturnType<typeof searchBody>>;
export type AnswerBody = z.infer<ReturnType<typeof answerBody>>;
