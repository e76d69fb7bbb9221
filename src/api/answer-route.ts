import type { FastifyInstance, FastifyRequest } from 'fastify';
import type { Config } from '../config/index.js';
import type { AnswerRequest, AppDeps } from './app.js';
import type { Scope } from './auth.js';
import { answerBody } from './schemas.js';
import { isSearchMode, parse, withDeadline } from './util.js';

export interface AnswerRouteContext {
  config: Readonly<Config>;
  deps: AppDeps;
  /** Readiness, scope and collection checks; throws the coded error. */
  guard(req: FastifyRequest, scope: Scope, action: string, collection?: string): void;
}

/** POST /v1/answer */
export function registerAnswerRoute(r: FastifyInstance, ctx: AnswerRouteContext): void {
  const { config, deps, guard } = ctx;
  const answerSchema = answerBody(config.limits);
  const metrics = deps.metrics;
  r.post('/v1/answer', async (req) => {
    const body = parse(answerSchema, req.body);
    const collection = body.collection ?? config.seed.collection;
    guard(req, 'query', 'ask questions', collection);
    const retrievalMode = body.retrieval ?? (isSearchMode(body.mode) ? body.mode : 'hybrid');
    const deadline = AbortSignal.timeout(config.server.requestTimeoutMs);
    const request: AnswerRequest = {
      question: body.question,
      collection,
      k: body.k ?? config.retrieval.k,
      mode: retrievalMode,
      style: body.mode === 'extractive' ? 'extractive' : 'auto',
      signal: deadline,
    };
    if (body.history) request.history = body.history;
    const result = await withDeadline(deps.answer(request), config.server.requestTimeoutMs);
    metrics?.answers.inc({ mode: result.mode, abstained: String(result.abstained) });
    if (result.fallbackReason) metrics?.answerFallbacks.inc({ reason: result.fallbackReason });
    return result;
  });
}
