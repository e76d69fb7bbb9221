import multipart from '@fastify/multipart';
import type { FastifyInstance } from 'fastify';
import type { Config } from '../config/index.js';
import { SourceboundError } from '../errors.js';
import type { DocumentService, UploadOutcome } from '../jobs/index.js';
import { grantedCollection, keyAccess } from './access.js';
import { mayUseCollection } from './auth.js';
import { reindexBody, textUpload } from './schemas.js';
import { parse } from './util.js';

export interface DocumentRouteContext {
  config: Readonly<Config>;
  documents: DocumentService;
}

// JSON uploads hold the whole text in memory: keep them modest; files of any allowed size go as multipart.
const JSON_UPLOAD_MAX = 10 * 1024 * 1024;

function reply202(outcome: UploadOutcome): { code: number; body: Record<string, unknown> } {
  if (outcome.status === 'unchanged') {
    return {
      code: 200,
      body: { status: 'unchanged', documentId: outcome.documentId, source: outcome.source, message: 'identical content is already indexed; nothing to do' },
    };
  }
  if (outcome.status === 'duplicate') {
    const { source, job } = outcome.of;
    return {
      code: 200,
      body: {
        status: 'duplicate',
        source: outcome.source,
        duplicateOf: { source, jobId: job.id, job: `/v1/jobs/${job.id}` },
        message: `the same content is being ingested from the upload "${source}" (job ${job.id}); this upload was not kept`,
      },
    };
  }
  return { code: 202, body: { status: 'queued', jobId: outcome.job.id, source: outcome.source, job: `/v1/jobs/${outcome.job.id}` } };
}

/** Document API: upload (multipart or JSON), list, get, delete; jobs; re-index. */
export async function registerDocumentRoutes(r: FastifyInstance, ctx: DocumentRouteContext): Promise<void> {
  const { config, documents } = ctx;
  const maxBytes = config.limits.documentMaxBytes;
  await r.register(multipart, { limits: { fileSize: maxBytes, files: 1, fields: 10, parts: 12 }, throwFileSizeLimit: true });

  // The collection is in the path, so the key's right to it is checked before any of the upload is read.
  const uploadAccess = keyAccess('ingest', 'add documents', { in: 'path' });
  r.post('/v1/collections/:collection/documents', { bodyLimit: Math.min(maxBytes, JSON_UPLOAD_MAX), config: { access: uploadAccess } }, async (req, reply) => {
    const collection = grantedCollection(req);
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

  r.get('/v1/collections/:collection/documents', { config: { access: keyAccess('query', 'list documents', { in: 'path' }) } }, async (req) => {
    return { documents: documents.list(grantedCollection(req)) };
  });

  r.get('/v1/collections/:collection/documents/:id', { config: { access: keyAccess('query', 'read documents', { in: 'path' }) } }, async (req) => {
    return documents.get(grantedCollection(req), (req.params as { id: string }).id);
  });

  r.delete('/v1/collections/:collection/documents/:id', { config: { access: keyAccess('ingest', 'delete documents', { in: 'path' }) } }, async (req) => {
    const id = (req.params as { id: string }).id;
    return { deleted: id, ...(await documents.remove(grantedCollection(req), id)) };
  });

  // Uploads whose job failed wait in uploads-failed/<collection>/ (never walked by a re-index) for an admin.
  const failedAccess = (action: string) => keyAccess('admin', action, { in: 'path' });
  r.get('/v1/collections/:collection/failed-uploads', { config: { access: failedAccess('list failed uploads') } }, async (req) => {
    return { failedUploads: await documents.failedUploads(grantedCollection(req)) };
  });
  r.delete('/v1/collections/:collection/failed-uploads/:name', { config: { access: failedAccess('delete failed uploads') } }, async (req) => {
    const name = (req.params as { name: string }).name;
    documents.deleteFailedUpload(grantedCollection(req), name);
    return { deleted: name };
  });

  // Any scope may follow a job, but only a job of one of the key's collections; a job that spans every
  // collection (a re-index of all) only with a key that holds every collection. Others look missing.
  r.get('/v1/jobs/:jobId', { config: { access: keyAccess(['query', 'ingest', 'admin'], 'read jobs', { in: 'own' }) } }, async (req) => {
    const job = await documents.job((req.params as { jobId: string }).jobId);
    const p = req.principal;
    const visible = job.collection === null ? p.collections === null : mayUseCollection(p, job.collection);
    if (!visible) throw new SourceboundError('SB_ERR_UNKNOWN_JOB', [job.id]);
    return { id: job.id, kind: job.kind, collection: job.collection, state: job.state, attempts: job.attempts, result: job.result, error: job.error, createdAt: job.createdAt, startedAt: job.startedAt, finishedAt: job.finishedAt };
  });

  // A key's collections bound its re-index too: without a collection named, a key limited to one
  // collection re-indexes that one, and a key limited to several must name one.
  r.post('/v1/reindex', { config: { access: keyAccess('admin', 're-index', { in: 'body', absent: 'own' }) } }, async (req, reply) => {
    const body = parse(reindexBody, req.body ?? {});
    let collection = req.grantedCollection ?? undefined;
    const own = req.principal.collections;
    if (collection === undefined && own !== null) {
      if (own.size !== 1) {
        throw new SourceboundError('SB_ERR_VALIDATION', [`collection: this key may re-index only ${[...own].sort().join(', ')}; name one of them`]);
      }
      collection = [...own][0]!;
    }
    const job = await documents.reindex({ ...(collection ? { collection } : {}), ...(body.full ? { full: true } : {}) });
    return reply.status(202).send({ status: 'queued', jobId: job.id, job: `/v1/jobs/${job.id}` });
  });
}
