import { Counter, Gauge, Histogram, Registry, collectDefaultMetrics } from 'prom-client';

// Prometheus text exposition format via prom-client. One registry per service instance (not the
// library's global one), so that several apps in one test process do not share counters.

export interface Metrics {
  readonly registry: Registry;
  readonly httpRequests: Counter<'method' | 'route' | 'status'>;
  readonly httpDuration: Histogram<'method' | 'route' | 'status'>;
  readonly retrievalDuration: Histogram<'mode'>;
  readonly embeddingDuration: Histogram<'path'>;
  readonly completionCalls: Counter<'outcome'>;
  readonly answers: Counter<'mode' | 'abstained'>;
  readonly answerFallbacks: Counter<'reason'>;
  readonly rejected: Counter<'reason'>;
}

export interface MetricsSources {
  indexSizes(): { collection: string; chunks: number; documents: number }[];
  jobCounts(): { state: string; count: number }[];
}

const LATENCY_BUCKETS = [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30];

export function createMetrics(sources: MetricsSources, opts: { processMetrics?: boolean } = {}): Metrics {
  const registry = new Registry();
  if (opts.processMetrics ?? true) collectDefaultMetrics({ register: registry, prefix: 'sourcebound_' });
  const m: Metrics = {
    registry,
    httpRequests: new Counter({
      name: 'sourcebound_http_requests_total',
      help: 'HTTP requests by route and status',
      labelNames: ['method', 'route', 'status'],
      registers: [registry],
    }),
    httpDuration: new Histogram({
      name: 'sourcebound_http_request_duration_seconds',
      help: 'HTTP request latency by route and status',
      labelNames: ['method', 'route', 'status'],
      buckets: LATENCY_BUCKETS,
      registers: [registry],
    }),
    retrievalDuration: new Histogram({
      name: 'sourcebound_retrieval_duration_seconds',
      help: 'Retrieval latency (query embedding included) by mode',
      labelNames: ['mode'],
      buckets: LATENCY_BUCKETS,
      registers: [registry],
    }),
    embeddingDuration: new Histogram({
      name: 'sourcebound_embedding_duration_seconds',
      help: 'Embedding call latency (query path or ingest)',
      labelNames: ['path'],
      buckets: LATENCY_BUCKETS,
      registers: [registry],
    }),
    completionCalls: new Counter({
      name: 'sourcebound_completion_calls_total',
      help: 'Calls to the completion endpoint by outcome',
      labelNames: ['outcome'],
      registers: [registry],
    }),
    answers: new Counter({
      name: 'sourcebound_answers_total',
      help: 'Answers by mode and whether they abstained',
      labelNames: ['mode', 'abstained'],
      registers: [registry],
    }),
    answerFallbacks: new Counter({
      name: 'sourcebound_answer_fallbacks_total',
      help: 'Generative answers that fell back to extractive, by reason',
      labelNames: ['reason'],
      registers: [registry],
    }),
    rejected: new Counter({
      name: 'sourcebound_rejected_requests_total',
      help: 'Requests refused for load or limits (busy, rate limited, deadline)',
      labelNames: ['reason'],
      registers: [registry],
    }),
  };
  new Gauge({
    name: 'sourcebound_index_chunks',
    help: 'Chunks indexed per collection',
    labelNames: ['collection'],
    registers: [registry],
    collect() {
      this.reset();
      for (const s of sources.indexSizes()) this.set({ collection: s.collection }, s.chunks);
    },
  });
  new Gauge({
    name: 'sourcebound_index_documents',
    help: 'Documents per collection',
    labelNames: ['collection'],
    registers: [registry],
    collect() {
      this.reset();
      for (const s of sources.indexSizes()) this.set({ collection: s.collection }, s.documents);
    },
  });
  new Gauge({
    name: 'sourcebound_jobs',
    help: 'Jobs by state (queued = queue depth)',
    labelNames: ['state'],
    registers: [registry],
    collect() {
      this.reset();
      for (const s of ['queued', 'running', 'succeeded', 'failed']) this.set({ state: s }, 0);
      for (const j of sources.jobCounts()) this.set({ state: j.state }, j.count);
    },
  });
  return m;
}
