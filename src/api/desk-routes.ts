import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import type { Config } from '../config/index.js';
import { grantedCollection, keyAccess, SIGNED_LINK } from './access.js';
import type { DeskService } from './desk-service.js';
import { passageQuery, ratingBody } from './schemas.js';
import { parse } from './util.js';

export interface DeskRouteContext {
  config: Readonly<Config>;
  desk: DeskService;
}

/** The granted collection (from the path) and the document id. */
function target(req: FastifyRequest): { collection: string; id: string } {
  return { collection: grantedCollection(req), id: (req.params as { id?: string }).id ?? '' };
}

/** The desk's reads (passage in context, original file) and its ratings. */
export function registerDeskRoutes(r: FastifyInstance, ctx: DeskRouteContext): void {
  const { config, desk } = ctx;
  const readDocuments = keyAccess('query', 'read documents', { in: 'path' });
  const ratingSchema = ratingBody(config.limits);

  r.get('/v1/collections/:collection/documents/:id/passage', { config: { access: readDocuments } }, async (req) => {
    const { collection, id } = target(req);
    const q = parse(passageQuery, req.query ?? {});
    return desk.passage(collection, id, q.start, q.end);
  });

  const sendOriginal = async (reply: FastifyReply, collection: string, id: string) => {
    const file = await desk.original(collection, id);
    void reply
      .header('content-type', file.contentType)
      .header('content-length', String(file.bytes.length))
      .header('content-disposition', `inline; filename*=UTF-8''${encodeURIComponent(file.fileName)}`)
      .header('cache-control', 'private, no-store')
      .header('referrer-policy', 'no-referrer')
      .header('x-content-type-options', 'nosniff');
    // A stored HTML page must never run as this service's own page: no scripts, no requests, an origin of its own.
    if (!file.contentType.startsWith('application/pdf')) void reply.header('content-security-policy', "sandbox; default-src 'none'; style-src 'unsafe-inline'");
    return reply.send(file.bytes);
  };

  r.get('/v1/collections/:collection/documents/:id/original', { config: { access: readDocuments } }, async (req, reply) => {
    const { collection, id } = target(req);
    return sendOriginal(reply, collection, id);
  });

  r.post('/v1/collections/:collection/documents/:id/original-link', { config: { access: readDocuments } }, async (req) => {
    const { collection, id } = target(req);
    return desk.linkOriginal(collection, id);
  });

  // Outside /v1/: the signed token is the credential, so a browser can follow it as a plain link.
  r.get('/originals', { config: { access: SIGNED_LINK } }, async (req, reply) => {
    const link = (req.query as { link?: unknown } | undefined)?.link;
    const { collection, documentId } = desk.redeemLink(typeof link === 'string' ? link : '');
    return sendOriginal(reply, collection, documentId);
  });

  r.post('/v1/ratings', { config: { access: keyAccess('query', 'rate answers', { in: 'body', absent: 'default' }) } }, async (req, reply) => {
    const body = parse(ratingSchema, req.body);
    const collection = grantedCollection(req);
    const saved = await desk.ratings.add({
      collection,
      keyId: req.principal.keyId,
      question: body.question,
      answeredQuestion: body.answeredQuestion && body.answeredQuestion !== body.question ? body.answeredQuestion : null,
      history: body.history ?? [],
      answer: body.answer,
      abstained: body.abstained,
      sources: (body.sources ?? []).map((s) => ({ n: s.n, documentId: s.documentId, source: s.source, title: s.title, page: s.page, section: s.section, quote: s.quote })),
      helpful: body.helpful,
      comment: body.comment ? body.comment : null,
    });
    return reply.status(201).send({ id: saved.id, createdAt: saved.createdAt });
  });
}
