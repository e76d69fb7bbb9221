import Fastify, { type FastifyBaseLogger, type FastifyError, type FastifyInstance, type FastifyReply, type FastifyRequest } from 'fastify';
import { z } from 'zod';
import type { Config } from '../config/index.js';
import { SourceboundError, type ErrorCode } from '../errors.js';
import type { Logger } from '../logger.js';
import type { AnswerResult, SearchHit, SearchMode } from '../types.js';
import { answerBody, searchBody } from './schemas.js';

export interface AnswerRequest {
  question: string;
  collection: string;
  history?: { role: 'user' | 'assistant'; content: string }[];
  k?: number;
  mode?: SearchMode;
  /** "extractive" never calls the completion endpoint. */
  style?: 'auto' | 'extractive';
}

/** What the HTTP layer needs from the rest of the service. Tests pass their own. */
export interface AppDeps {
  logger: Logger;
  search(req: { query: string; collection: string; k: number; mode: SearchMode }): Promise<SearchHit[]>;
  answer(req: AnswerRequest): Promise<AnswerResult>;
  isReady(): boolean;
  health(): Record<string, unknown>;
  collections(): { name: string; documents: number; chunks: number; embedderId: string | null }[];
}

export function buildApp(config: Readonly<Config>, deps: AppDeps): FastifyInstance {
  const app = Fastify({
    loggerInstance: deps.logger as FastifyBaseLogger,
    bodyLimit: config.server.bodyLimitBytes,
    requestIdHeader: 'x-request-id',
    genReqId: () => crypto.randomUUID(),
    connectionTimeout: config.server.requestTimeoutMs,
  });
  const limits = config.limits;
  const searchSchema = searchBody(limits);
  const answerSchema = answerBody(limits);

  // JSON only: without this, fastify would hand text/plain bodies to the routes as strings.
  app.removeContentTypeParser('text/plain');

  app.addHook('onSend', async (req, reply) => {
    reply.header('x-request-id', req.id);
  });

  app.setErrorHandler((err: FastifyError | SourceboundError | z.ZodError, req, reply) => {
    const { status, code, message, details } = mapError(err, config.server.bodyLimitBytes);
    if (status >= 500) req.log.error({ err }, 'request failed');
    else req.log.info({ code }, 'request refused');
    void reply.status(status).send({ error: { code, message, details } });
  });

  app.setNotFoundHandler((req, reply) => {
    void reply.status(404).send({
      error: { code: 'SB_ERR_NOT_FOUND', message: `No route ${req.method} ${req.url.split('?')[0]}`, details: null },
    });
  });

  const requireReady = async (_req: FastifyRequest, _reply: FastifyReply): Promise<void> => {
    if (!deps.isReady()) throw new SourceboundError('SB_ERR_NOT_READY');
  };

  app.get('/health', async () => ({ status: 'ok', ...deps.health() }));

  app.get('/ready', async (_req, reply) => {
    const ready = deps.isReady();
    return reply.status(ready ? 200 : 503).send({ status: ready ? 'ready' : 'loading' });
  });

  app.get('/v1/collections', { preHandler: requireReady }, async () => ({ collections: deps.collections() }));

  app.post('/v1/search', { preHandler: requireReady }, async (req) => {
    const body = parse(searchSchema, req.body);
    const results = await deps.search({
      query: body.query,
      collection: body.collection ?? config.seed.collection,
      k: body.k ?? config.retrieval.k,
      mode: body.mode ?? 'hybrid',
    });
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
        text: h.text,
        score: h.score,
      })),
    };
  });

  app.post('/v1/answer', { preHandler: requireReady }, async (req) => {
    const body = parse(answerSchema, req.body);
    const retrievalMode = body.retrieval ?? (isSearchMode(body.mode) ? body.mode : 'hybrid');
    const request: AnswerRequest = {
      question: body.question,
      collection: body.collection ?? config.seed.collection,
      k: body.k ?? config.retrieval.k,
      mode: retrievalMode,
      style: body.mode === 'extractive' ? 'extractive' : 'auto',
    };
    if (body.history) request.history = body.history;
    return deps.answer(request);
  });

  return app;
}

function isSearchMode(m: string | undefined): m is SearchMode {
  return m === 'hybrid' || m === 'lexical' || m === 'dense';
}

function parse<T>(schema: z.ZodType<T>, body: unknown): T {
  if (body === undefined || body === null || typeof body !== 'object' || Array.isArray(body)) {
    throw new SourceboundError('SB_ERR_VALIDATION', ['the body must be a JSON object'], { issues: [] });
  }
  const r = schema.safeParse(body);
  if (!r.success) {
    const issues = r.error.issues.map((i) => ({ path: i.path.map(String), code: i.code, message: i.message }));
    const summary = issues.map((i) => (i.path.length ? `${i.path.join('.')}: ${i.message}` : i.message)).join('; ');
    throw new SourceboundError('SB_ERR_VALIDATION', [summary], { issues });
  }
  return r.data;
}

function mapError(
  err: FastifyError | SourceboundError | Error,
  bodyLimit: number,
): { status: number; code: ErrorCode; message: string; details: unknown } {
  if (err instanceof SourceboundError) {
    return { status: err.status, code: err.code, message: err.message, details: err.details ?? null };
  }
  const fe = err as FastifyError;
  const make = (code: ErrorCode, ...args: (string | number)[]) => {
    const e = new SourceboundError(code, args);
    return { status: e.status, code, message: e.message, details: null };
  };
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
