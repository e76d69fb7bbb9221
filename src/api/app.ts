import Fastify, { type FastifyBaseLogger, type FastifyError, type FastifyInstance } from 'fastify';
import type { Config } from '../config/index.js';
import { SourceboundError, type ErrorCode } from '../errors.js';
import { grantedCollection, installAccessControl, keyAccess, PUBLIC, routeTable } from './access.js';
import { registerMethodNotAllowed } from './method-not-allowed.js';
import { createAuthenticator, mayUseCollection } from './auth.js';
import { createRateLimiter } from './rate-limit.js';
import { registerAnswerRoute } from './answer-route.js';
import type { AnswerRequest, AppDeps } from './deps.js';
import { registerDocumentRoutes } from './documents-route.js';
import { registerDeskAssets } from './desk-static.js';
import { registerDeskRoutes } from './desk-routes.js';
import { registerOpenApiRoute } from './openapi.js';
import { searchBody } from './schemas.js';
import { parse, withDeadline } from './util.js';

export type { AnswerRequest, AppDeps };

export function buildApp(config: Readonly<Config>, deps: AppDeps): FastifyInstance {
  const app = Fastify({
    loggerInstance: deps.logger as FastifyBaseLogger,
    bodyLimit: config.server.bodyLimitBytes,
    requestIdHeader: 'x-request-id',
    genReqId: () => crypto.randomUUID(),
    // The hard stop for a request that never completes; answers also carry their own deadline below.
    requestTimeout: config.server.requestTimeoutMs + 5_000,
  });
  const limits = config.limits;
  const searchSchema = searchBody(limits);
  const auth = createAuthenticator(config.auth, config.server.host);
  const metrics = deps.metrics;

  // JSON only: without this, fastify would hand text/plain bodies to the routes as strings.
  app.removeContentTypeParser('text/plain');

  // Before any route is registered, so that every route is recorded and passes through the hooks.
  installAccessControl(app, {
    auth,
    limiter: createRateLimiter({ max: limits.rateLimitPerMinute, windowMs: 60_000, now: deps.now ?? Date.now }),
    isReady: deps.isReady,
    defaultCollection: config.seed.collection,
    logger: deps.logger,
    ...(metrics ? { metrics } : {}),
  });

  // While shutting down, replies to requests still in flight end their connection: a kept-alive socket
  // would otherwise hold the close (and the process) until its keep-alive timeout.
  let closing = false;
  app.addHook('preClose', async () => {
    closing = true;
  });
  app.addHook('onSend', async (req, reply) => {
    reply.header('x-request-id', req.id);
    if (closing) reply.header('connection', 'close');
  });

  if (metrics) {
    app.addHook('onResponse', async (req, reply) => {
      const labels = { method: req.method, route: req.routeOptions.url ?? 'unmatched', status: String(reply.statusCode) };
      metrics.httpRequests.inc(labels);
      metrics.httpDuration.observe(labels, reply.elapsedTime / 1000);
    });
  }

  app.setErrorHandler((err: FastifyError | SourceboundError, req, reply) => {
    const { status, code, message, details } = mapError(err, config.server.bodyLimitBytes, config.limits.documentMaxBytes);
    if (status >= 500 && code !== 'SB_ERR_BUSY' && code !== 'SB_ERR_NOT_READY' && code !== 'SB_ERR_DEADLINE' && code !== 'SB_ERR_DATABASE_UNUSABLE') {
      req.log.error({ err }, 'request failed');
    } else {
      req.log.info({ code }, 'request refused');
    }
    if (code === 'SB_ERR_BUSY' || code === 'SB_ERR_NOT_READY' || code === 'SB_ERR_DEADLINE' || code === 'SB_ERR_DATABASE_UNUSABLE') {
      void reply.header('retry-after', '1');
      if (code === 'SB_ERR_BUSY' || code === 'SB_ERR_DEADLINE') metrics?.rejected.inc({ reason: code === 'SB_ERR_BUSY' ? 'busy' : 'deadline' });
    }
    if (code === 'SB_ERR_UNAUTHORIZED') void reply.header('www-authenticate', 'Bearer');
    void reply.status(status).send({ error: { code, message, details } });
  });

  app.setNotFoundHandler((req, reply) => {
    void reply.status(404).send({
      error: { code: 'SB_ERR_NOT_FOUND', message: `No route ${req.method} ${req.url.split('?')[0]}`, details: null },
    });
  });

  // Routes live in a child plugin registered after the access hooks, so the hooks apply to all of them.
  // Each route states who may call it in `config.access` (src/api/access.ts); one that does not is refused.
  void app.register(async (r) => {
    // Alive is 200; a job queue whose thread keeps dying before it can take a job is 503, so a monitor (or an
    // orchestrator restarting the process) notices that uploads would wait for ever (docs/api.md).
    r.get('/health', { config: { access: PUBLIC } }, async (_req, reply) => {
      const queue = deps.queueHealth?.();
      const failing = queue?.state === 'down';
      return reply.status(failing ? 503 : 200).send({ status: failing ? 'failing' : 'ok', ...deps.health(), ...(queue ? { queue } : {}) });
    });

    r.get('/ready', { config: { access: PUBLIC } }, async (_req, reply) => {
      const ready = deps.isReady();
      return reply.status(ready ? 200 : 503).send({ status: ready ? 'ready' : 'loading' });
    });

    // Per-collection series only for what the key may see (all of them for a key holding every collection).
    r.get('/metrics', { config: { access: keyAccess('admin', 'read metrics', { in: 'own' }, { whileLoading: true }) } }, async (req, reply) => {
      if (!metrics) throw new SourceboundError('SB_ERR_NOT_FOUND', ['GET', '/metrics']);
      return reply.header('content-type', metrics.contentType).send(await metrics.render(req.principal.collections));
    });

    r.get('/v1/collections', { config: { access: keyAccess('query', 'list collections', { in: 'own' }) } }, async (req) => {
      return { collections: deps.collections().filter((c) => mayUseCollection(req.principal, c.name)) };
    });

    r.post('/v1/search', { config: { access: keyAccess('query', 'search', { in: 'body', absent: 'default' }) } }, async (req) => {
      const body = parse(searchSchema, req.body);
      const collection = grantedCollection(req);
      const position = deps.indexPosition?.();
      const results = await withDeadline(
        deps.search({
          query: body.query,
          collection,
          k: body.k ?? config.retrieval.k,
          mode: body.mode ?? 'hybrid',
          ...(body.filter ? { filter: body.filter } : {}),
        }),
        config.server.requestTimeoutMs,
      );
      return {
        results: results.map((h) => ({
          chunkId: h.chunkId,
          documentId: h.documentId,
          source: h.source,
          title: h.title,
          page: h.page,
          pageEnd: h.pageEnd,
          section: h.section,
          effectiveDate: h.effectiveDate,
          version: h.version ?? null,
          text: h.text,
          score: h.score,
        })),
        ...(position !== undefined ? { indexPosition: position } : {}),
      };
    });

    registerAnswerRoute(r, { config, deps });
    if (deps.documents) await registerDocumentRoutes(r, { config, documents: deps.documents });
    if (deps.desk) registerDeskRoutes(r, { config, desk: deps.desk });
    registerDeskAssets(r, deps.deskAssetsDir !== undefined ? { dir: deps.deskAssetsDir } : {});
    registerOpenApiRoute(r, app, config);
    registerMethodNotAllowed(r, routeTable(app));
  });

  return app;
}

function mapError(
  err: FastifyError | SourceboundError | Error,
  bodyLimit: number,
  uploadLimit: number,
): { status: number; code: ErrorCode; message: string; details: unknown } {
  if (err instanceof SourceboundError) {
    return { status: err.status, code: err.code, message: err.message, details: err.details ?? null };
  }
  const fe = err as FastifyError;
  const make = (code: ErrorCode, ...args: (string | number)[]) => {
    const e = new SourceboundError(code, args);
    return { status: e.status, code, message: e.message, details: null };
  };
  if (fe.code === 'FST_REQ_FILE_TOO_LARGE') return make('SB_ERR_UPLOAD_TOO_LARGE', uploadLimit);
  if (fe.statusCode === 413 || fe.code === 'FST_ERR_CTP_BODY_TOO_LARGE') return make('SB_ERR_BODY_TOO_LARGE', bodyLimit);
  if (fe.statusCode === 415 || fe.code === 'FST_ERR_CTP_INVALID_MEDIA_TYPE') return make('SB_ERR_UNSUPPORTED_MEDIA_TYPE');
  if (fe.code === 'FST_ERR_CTP_EMPTY_JSON_BODY') return make('SB_ERR_VALIDATION', 'the body is empty; send a JSON object');
  if (fe.code === 'FST_ERR_CTP_INVALID_CONTENT_LENGTH') return make('SB_ERR_VALIDATION', 'the Content-Length header does not match the body');
  if (err instanceof SyntaxError || fe.code === 'FST_ERR_CTP_INVALID_JSON_BODY') return make('SB_ERR_MALFORMED_JSON', err.message);
  if (fe.statusCode && fe.statusCode >= 400 && fe.statusCode < 500) {
    return { status: fe.statusCode, code: 'SB_ERR_VALIDATION', message: fe.message, details: null };
  }
  return make('SB_ERR_INTERNAL');
}
