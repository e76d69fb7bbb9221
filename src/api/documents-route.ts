import multipart from '@fastify/multipart';
import type { FastifyInstance, FastifyRequest } from 'fastify';
import { z } from 'zod';
import type { Config } from '../config/index.js';
import { SourceboundError } from '../errors.js';
import type { DocumentService, UploadOutcome } from '../jobs/index.js';
import type { Scope } from './auth.js';
import { mayUseCollection } from './auth.js';
import { collectionName } from './schemas.js';
import { parse } from './util.js';

export interface DocumentRouteContext {
  config: Readonly<Config>;
  documents: DocumentService;
  guard(req: FastifyRequest, scope: Scope, action: string, collection?: string): void;
}

// JSON uploads hold the whole text in memory: keep them modest; files of any allowed size go as multipart.
const JSON_UPLOAD_MAX = 10 * 1024 * 1024;

const textUpload = z
  .object({
    name: z.string().min(1).max(200),
    text: z.string().min(1, 'text must not be empty'),
    metadata: z.record(z.string().regex(/^[A-Za-z][A-Za-z0-9_-]{0,40}$/), z.string().max(500)).optional(),
  })
  .strict();

const reindexBody = z.object({ collection: collectionName.optional(), full: z.boolean().optional() }).strict();

function collectionParam(params: unknown): string {
  const c = (params as { collection?: string }).collection ?? '';
  const r = collectionName.safeParse(c);
  if (!r.success) throw new SourceboundError('SB_ERR_VALIDATION', [`collection: ${r.error.issues[0]?.message ?? 'invalid'}`]);
  return c;
}

function reply202(outcome: UploadOutcome): { code: number; body: Record<string, unknown> } {
  if (outcome.status === 'unchanged') {
    return {
      code: 200,
      body: { status: 'unchanged', documentId: outcome.documentId, source: outcome.source, message: 'identical content is already indexed; nothing to do' },
    };
  }
  return { code: 202, body: { status: 'queued', jobId: outcome.job.id, source: outcome.source, job: `/v1/jobs/${outcome.job.id}` } };
}

/** Document API: upload (multipart or JSON), list, get, delete; jobs; re-index. */
export async function registerDocumentRoutes(r: FastifyInstance, ctx: DocumentRouteContext): Promise<void> {
  const { config, documents, guard } = ctx;
  const maxBytes = config.limits.documentMaxBytes;
  await r.register(multipart, { limits: { fileSize: maxBytes, files: 1, fields: 10, parts: 12 }, throwFileSizeLimit: true });

  r.post('/v1/collections/:collection/documents', { bodyLimit: Math.min(maxBytes, JSON_UPLOAD_MAX) }, async (req, reply) => {
    const collection = collectionParam(req.params);
    guard(req, 'ingest', 'add documents', collection);
    // Refuse an oversized upload from its declared length, before reading any of it.
    const declared = Number(req.headers['content-length'] ?? 0);
    if (declared > maxBytes + 64 * 1024) throw new SourceboundError('SB_ERR_UPLOAD_TOO_LARGE', [maxBytes]);
    let outcome: UploadOutcome;
    if (req.isMultipart()) {
      const file = await req.file();
      if (!file) throw new SourceboundError('SB_ERR_VALIDATION', ['send the document as a multipart field named "file"']);
      outcome = await documents.upload(collection, file.filename, file.file);
    } else {
      const body = parse(textUpload, req.body);
      const ext = body.name.toLowerCase().match(/\.(md|markdown|txt|text)$/);
      if (!ext) throw new SourceboundError('SB_ERR_BAD_FILE_NAME', ['JSON uploads are text: the name must end in .md or .txt']);
      let text = body.text;
      if (body.metadata && Object.keys(body.metadata).length > 0) {
        if (!/\.(md|markdown)$/i.test(body.name)) throw new SourceboundError('SB_ERR_VALIDATION', ['metadata: only Markdown (.md) uploads carry metadata (as front matter)']);
        const lines = Object.entries(body.metadata).map(([k, v]) => `${k}: ${v.replace(/\n/g, ' ')}`);
        text = `---\n${lines.join('\n')}\n---\n${text}`;
      }
      outcome = await documents.upload(collection, body.name, new TextEncoder().encode(text));
    }
    const out = reply202(outcome);
    return reply.status(out.code).send(out.body);
  });

  r.get('/v1/collections/:collection/documents', async (req) => {
    const collection = collectionParam(req.params);
    guard(req, 'query', 'list documents', collection);
    return { documents: documents.list(collection) };
  });

  r.get('/v1/collections/:collection/documents/:id', async (req) => {
    const collection = collectionParam(req.params);
    guard(req, 'query', 'read documents', collection);
    return documents.get(collection, (req.params as { id: string }).id);
  });

  r.delete('/v1/collections/:collection/documents/:id', async (req) => {
    const collection = collectionParam(req.params);
    guard(req, 'ingest', 'delete documents', collection);
    const id = (req.params as { id: string }).id;
    return { deleted: id, ...documents.remove(collection, id) };
  });

  r.get('/v1/jobs/:id', async (req) => {
    guard(req, 'query', 'read jobs');
    const job = documents.job((req.params as { id: string }).id);
    const p = req.principal;
    // Non-admin keys see jobs of their own collections only; others look exactly like missing jobs.
    const visible = p.scopes.has('admin') || (job.collection !== null && mayUseCollection(p, job.collection) && (p.scopes.has('ingest') || p.scopes.has('query')));
    if (!visible || (p.collections !== null && job.collection === null && !p.scopes.has('admin'))) {
      throw new SourceboundError('SB_ERR_UNKNOWN_JOB', [job.id]);
    }
    return { id: job.id, kind: job.kind, collection: job.collection, state: job.state, attempts: job.attempts, result: job.result, error: job.error, createdAt: job.createdAt, startedAt: job.startedAt, finishedAt: job.finishedAt };
  });

  r.post('/v1/reindex', async (req, reply) => {
    const body = parse(reindexBody, req.body ?? {});
    guard(req, 'admin', 're-index', body.collection);
    const job = documents.reindex({ ...(body.collection ? { collection: body.collection } : {}), ...(body.full ? { full: true } : {}) });
    return reply.status(202).send({ status: 'queued', jobId: job.id, job: `/v1/jobs/${job.id}` });
  });
}
