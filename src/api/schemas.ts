import { z } from 'zod';

// One schema per body: validation, TypeScript types and the OpenAPI description all come from here.

export const COLLECTION_NAME = /^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$/;

export const collectionName = z
  .string()
  .regex(COLLECTION_NAME, 'a collection name is 1-64 letters, digits, ".", "_" or "-", starting with a letter or digit');

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

export type SearchBody = z.infer<ReturnType<typeof searchBody>>;
export type AnswerBody = z.infer<ReturnType<typeof answerBody>>;
