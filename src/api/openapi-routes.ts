// What each route takes and gives, keyed by the method and path the router records. The schemas are the
// ones the routes validate with and reply with; tests/api/openapi.test.ts fails when a route of the
// router has no entry here, or an entry names a route the router lacks.

import { z } from 'zod';
import type { Config } from '../config/index.js';
import * as reply from './replies.js';
import { answerBody, collectionName, passageQuery, ratingBody, reindexBody, searchBody, textUpload } from './schemas.js';

export interface Reply {
  description: string;
  schema?: z.ZodType;
  /** The media type when it is not application/json. */
  type?: string;
}

export interface Operation {
  summary: string;
  description?: string;
  /** The JSON body. */
  body?: z.ZodType;
  /** The body may instead be multipart/form-data with one file field named "file". */
  multipart?: boolean;
  params?: Record<string, z.ZodType>;
  query?: z.ZodObject;
  replies: Record<number, Reply>;
}

const documentParams = { collection: collectionName, id: z.string().min(1).max(200) };
const json = (description: string, schema: z.ZodType): Reply => ({ description, schema });

export function describedRoutes(limits: Readonly<Config['limits']>): Record<string, Operation> {
  return {
    'GET /health': {
      summary: 'liveness, with the embedder and the job queue; 503 when the job queue is down',
      replies: { 200: json('alive', reply.healthReply), 503: json('alive, but the job thread keeps dying before it can take a job', reply.healthReply) },
    },
    'GET /ready': {
      summary: 'readiness: 200 once the indexes are loaded',
      replies: { 200: json('ready', reply.readyReply), 503: json('still loading', reply.readyReply) },
    },
    'GET /metrics': { summary: 'Prometheus text format metrics', replies: { 200: { description: 'metrics', type: 'text/plain; version=0.0.4' } } },
    'GET /v1/openapi.json': { summary: 'this document', replies: { 200: { description: 'the OpenAPI 3.1 description of this service', type: 'application/json' } } },
    'GET /v1/collections': { summary: "the key's collections, with their sizes", replies: { 200: json('the collections', reply.collectionsReply) } },
    'POST /v1/search': {
      summary: 'ranked passages for a query (BM25, dense or hybrid)',
      body: searchBody(limits),
      replies: { 200: json('the passages, best first', reply.searchReply) },
    },
    'POST /v1/answer': {
      summary: 'a cited answer to a question, or an abstention',
      description:
        'With `stream: true` the reply is text/event-stream: a `sources` event, `delta` events (text pieces; `reset` replaces what came before), ' +
        'then `done` with the whole answer, or `error`.',
      body: answerBody(limits),
      replies: { 200: { ...json('the answer (or, streamed, its events)', reply.answerReply) }, 503: json('busy, still loading or past the deadline', reply.errorReply) },
    },
    'POST /v1/collections/:collection/documents': {
      summary: 'add a document: a file as multipart, or text as JSON',
      body: textUpload,
      multipart: true,
      params: { collection: collectionName },
      replies: {
        202: json('queued for ingestion; follow the job', reply.uploadQueued),
        200: json('the same content is already indexed (`unchanged`), or is being ingested from another upload (`duplicate`)', z.union([reply.uploadUnchanged, reply.uploadDuplicate])),
        413: json('larger than the upload limit', reply.errorReply),
      },
    },
    'GET /v1/collections/:collection/documents': {
      summary: "the collection's documents",
      params: { collection: collectionName },
      replies: { 200: json('the documents', reply.documentList) },
    },
    'GET /v1/collections/:collection/documents/:id': { summary: 'one document', params: documentParams, replies: { 200: json('the document', reply.documentSummary) } },
    'DELETE /v1/collections/:collection/documents/:id': {
      summary: 'remove a document and its chunks',
      params: documentParams,
      replies: { 200: json('removed', reply.documentDeleted) },
    },
    'GET /v1/collections/:collection/documents/:id/passage': {
      summary: 'a span of a document in its surrounding text',
      params: documentParams,
      query: passageQuery,
      replies: { 200: json('the passage', reply.passage) },
    },
    'GET /v1/collections/:collection/documents/:id/original': {
      summary: 'the original file of a document',
      params: documentParams,
      replies: { 200: { description: 'the file, with its own media type', type: 'application/octet-stream' } },
    },
    'POST /v1/collections/:collection/documents/:id/original-link': {
      summary: 'a signed link to the original file, for a browser to follow without the key',
      params: documentParams,
      replies: { 200: json('the link', reply.originalLink) },
    },
    'GET /originals': {
      summary: 'the original file a signed link names',
      query: z.object({ link: z.string().describe('the token from original-link') }),
      replies: { 200: { description: 'the file, with its own media type', type: 'application/octet-stream' } },
    },
    'GET /v1/collections/:collection/failed-uploads': {
      summary: 'uploads whose ingestion failed, kept aside for an admin to look at (never re-indexed)',
      params: { collection: collectionName },
      replies: { 200: json('the failed uploads, by name', reply.failedUploadList) },
    },
    'DELETE /v1/collections/:collection/failed-uploads/:name': {
      summary: 'delete one failed upload',
      params: { collection: collectionName, name: z.string().describe('a name from the list') },
      replies: { 200: json('deleted', reply.failedUploadDeleted), 404: json('no such failed upload', reply.errorReply) },
    },
    'GET /v1/jobs/:jobId': { summary: 'an ingestion or re-index job', replies: { 200: json('the job', reply.jobReply) } },
    'POST /v1/reindex': {
      summary: "re-read every remembered folder's documents",
      body: reindexBody,
      replies: { 202: json('queued', reply.reindexQueued), 409: json('a re-index is already running', reply.errorReply) },
    },
    'POST /v1/ratings': {
      summary: 'rate an answer given at the desk',
      body: ratingBody(limits),
      replies: { 201: json('saved', reply.ratingSaved) },
    },
    'GET /': { summary: 'the reference desk page', replies: { 200: { description: 'the page', type: 'text/html' } } },
    'GET /desk/:file': {
      summary: "the desk page's scripts, style sheet and icon",
      params: { file: z.string() },
      replies: { 200: { description: 'the file', type: 'application/octet-stream' } },
    },
  };
}
