import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import type { AnswerEvent } from '../answer/types.js';
import type { Config } from '../config/index.js';
import { SourceboundError } from '../errors.js';
import type { AnswerResult } from '../types.js';
import { grantedCollection, keyAccess } from './access.js';
import type { AnswerRequest, AppDeps } from './deps.js';
import { answerBody } from './schemas.js';
import { isSearchMode, parse, withDeadline } from './util.js';
import { sseFrame } from '../answer/sse.js';

export interface AnswerRouteContext {
  config: Readonly<Config>;
  deps: AppDeps;
}

/** The request the answer stage accepts: the HTTP layer's, plus a listener for progress events. */
type StreamingAnswerRequest = AnswerRequest & { onEvent?: (e: AnswerEvent) => void };

// Comment lines keep proxies and load balancers from closing a quiet stream while retrieval
// or the model is still working.
const KEEP_ALIVE_MS = 15_000;

/** POST /v1/answer */
export function registerAnswerRoute(r: FastifyInstance, ctx: AnswerRouteContext): void {
  const { config, deps } = ctx;
  const answerSchema = answerBody(config.limits);
  const metrics = deps.metrics;
  const count = (result: AnswerResult): void => {
    metrics?.answers.inc({ mode: result.mode, abstained: String(result.abstained) });
    if (result.fallbackReason) metrics?.answerFallbacks.inc({ reason: result.fallbackReason });
  };

  r.post('/v1/answer', { config: { access: keyAccess('query', 'ask questions', { in: 'body', absent: 'default' }) } }, async (req, reply) => {
    const body = parse(answerSchema, req.body);
    const collection = grantedCollection(req);
    const retrievalMode = body.retrieval ?? (isSearchMode(body.mode) ? body.mode : 'hybrid');
    const deadline = AbortSignal.timeout(config.server.requestTimeoutMs);
    const request: StreamingAnswerRequest = {
      question: body.question,
      collection,
      k: body.k ?? config.retrieval.k,
      mode: retrievalMode,
      style: body.mode === 'extractive' ? 'extractive' : 'auto',
      signal: deadline,
    };
    if (body.history) request.history = body.history;
    if (body.filter) request.filter = body.filter;
    if (!body.stream) {
      const position = deps.indexPosition?.();
      const result = await withDeadline(deps.answer(request), config.server.requestTimeoutMs);
      count(result);
      return position !== undefined ? { ...result, indexPosition: position } : result;
    }
    await streamAnswer(req, reply, request, deadline);
    return reply;
  });

  /**
   * Everything that can be refused (body, scope, readiness) was checked before the first byte,
   * so those still get a normal status and error body; once the stream has started, a failure
   * can only be reported in it: an `error` event, then the end of the stream.
   */
  async function streamAnswer(req: FastifyRequest, reply: FastifyReply, request: StreamingAnswerRequest, deadline: AbortSignal): Promise<void> {
    const gone = new AbortController();
    const raw = reply.raw;
    raw.on('close', () => {
      if (!raw.writableFinished) gone.abort();
    });
    request.signal = AbortSignal.any([deadline, gone.signal]);
    reply.hijack();
    raw.writeHead(200, {
      'content-type': 'text/event-stream; charset=utf-8',
      'cache-control': 'no-cache, no-transform',
      connection: 'keep-alive',
      'x-accel-buffering': 'no',
      'x-request-id': String(req.id),
    });
    const send = (event: string, data: unknown): void => {
      if (!raw.destroyed && !raw.writableEnded) raw.write(sseFrame(event, data));
    };
    const keepAlive = setInterval(() => {
      if (!raw.destroyed && !raw.writableEnded) raw.write(': keep-alive\n\n');
    }, KEEP_ALIVE_MS);
    request.onEvent = (e) => {
      if (e.type === 'sources') send('sources', { sources: e.sources });
      else send('delta', { text: e.text, ...(e.reset ? { reset: true } : {}), ...(e.citations ? { citations: e.citations } : {}) });
    };
    try {
      const position = deps.indexPosition?.();
      const result = await withDeadline(deps.answer(request), config.server.requestTimeoutMs);
      count(result);
      send('done', position !== undefined ? { ...result, indexPosition: position } : result);
    } catch (err) {
      if (gone.signal.aborted) {
        req.log.info('client left before the answer was ready');
      } else {
        const known = err instanceof SourceboundError;
        if (!known) req.log.error({ err }, 'streamed answer failed');
        send('error', {
          error: known
            ? { code: err.code, message: err.message }
            : { code: 'SB_ERR_INTERNAL', message: 'The answer could not be completed' },
        });
      }
    } finally {
      clearInterval(keepAlive);
      if (!raw.writableEnded) raw.end();
    }
  }
}
