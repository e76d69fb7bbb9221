import { Counter, Gauge, Histogram, Registry, collectDefaultMetrics } from 'prom-client';

// Prometheus text exposition format via prom-client. One registry per service instance (not the
// library's global one), so that several apps in one test process do not share counters.

export interface Metrics {
  /** The service-wide series: nothing in them names a collection. */
  readonly registry: Registry;
  readonly contentType: string;
  /**
   * The exposition text: the service-wide series, then the per-collection ones for these collections
   * only (null = every collection, and then also the jobs that span all collections).
   */
  render(collections: ReadonlySet<string> | null): Promise<string>;
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
  /** Jobs by state; limited to these collections when given (then jobs of no single collection are left out). */
  jobCounts(collections?: readonly string[]): { state: string; count: number }[];
}

const LATENCY_BUCKETS = [0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30];

export function createMetrics(sources: MetricsSources, opts: { processMetrics?: boolean } = {}): Metrics {
  const registry = new Registry();
  if (opts.processMetrics ?? true) collectDefaultMetrics({ register: registry, prefix: 'sourcebound_' });
  const m: Omit<Metrics, 'render' | 'contentType'> = {
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
  return { ...m, contentType: registry.contentType, render: (collections) => render(registry, sources, collections) };
}

/**
 * Per-collection series are built for each scrape from what the caller may see, in a registry of their
 * own, so a key limited to some collections never reads another's document, chunk or job counts.
 */
async function render(service: Registry, sources: MetricsSources, collections: ReadonlySet<string> | null): Promise<string> {
  const visible = sources.indexSizes().filter((s) => collections === null || collections.has(s.collection));
  const jobs = collections === null ? sources.jobCounts() : sources.jobCounts([...collections]);
  const scoped = new Registry();
  const chunks = new Gauge({ name: 'sourcebound_index_chunks', help: 'Chunks indexed per collection', labelNames: ['collection'], registers: [scoped] });
  const documents = new Gauge({ name: 'sourcebound_index_documents', help: 'Documents per collection', labelNames: ['collection'], registers: [scoped] });
  const jobGauge = new Gauge({ name: 'sourcebound_jobs', help: 'Jobs by state (queued = queue depth)', labelNames: ['state'], registers: [scoped] });
  for (const s of visible) {
    chunks.set({ collection: s.collection }, s.chunks);
    documents.set({ collection: s.collection }, s.documents);
  }
  for (const s of ['queued', 'running', 'succeeded', 'failed']) jobGauge.set({ state: s }, 0);
  for (const j of jobs) jobGauge.set({ state: j.state }, j.count);
  return `${await service.metrics()}\n${await scoped.metrics()}`;
}
