import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;

beforeAll(async () => {
  const made = await tempRuntime({ limits: { rateLimitPerMinute: 5 } });
  rt = made.rt;
  cleanup = made.cleanup;
  app = buildApp(made.config, appDeps(rt, () => true));
  await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
});
afterAll(async () => {
  await app.close();
  cleanup();
});

const json = { 'content-type': 'application/json' };

describe('/metrics', () => {
  it('exposes request counts, latency histograms, retrieval, answers and index size in the Prometheus text format', async () => {
    await app.inject({ method: 'POST', url: '/v1/answer', headers: json, payload: '{"question":"How long are found items kept?"}' });
    await app.inject({ method: 'POST', url: '/v1/answer', headers: json, payload: '{"question":"What is the salary of the chief executive?"}' });
    const res = await app.inject({ method: 'GET', url: '/metrics' });
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/plain; version=0\.0\.4/);
    const text = res.body;
    // Prometheus text exposition format: "# HELP", "# TYPE", then samples "name{labels} value".
    expect(text).toMatch(/^# TYPE sourcebound_http_requests_total counter$/m);
    expect(text).toMatch(/^sourcebound_http_requests_total\{method="POST",route="\/v1\/answer",status="200"\} 2$/m);
    expect(text).toMatch(/^sourcebound_http_request_duration_seconds_bucket\{le="\+Inf",method="POST",route="\/v1\/answer",status="200"\} 2$/m);
    // At least one hybrid retrieval per answer (the answer stage may run extra lexical look-ups).
    expect(Number(/^sourcebound_retrieval_duration_seconds_count\{mode="hybrid"\} (\d+)$/m.exec(text)?.[1])).toBeGreaterThanOrEqual(2);
    expect(text).toMatch(/^sourcebound_embedding_duration_seconds_count\{path="query"\} [1-9]/m);
    expect(text).toMatch(/^sourcebound_answers_total\{mode="extractive",abstained="true"\} 1$/m);
    const chunks = /^sourcebound_index_chunks\{collection="default"\} (\d+)$/m.exec(text);
    expect(Number(chunks?.[1])).toBe(rt.repo.getCollection('default')!.chunks);
    expect(text).toMatch(/^sourcebound_jobs\{state="queued"\} 0$/m);
    expect(text).toMatch(/^sourcebound_process_resident_memory_bytes \d+/m);
  });
});

describe('rate limits', () => {
  it('answers 429 SB_ERR_RATE_LIMITED past the per-minute limit, with Retry-After', async () => {
    const statuses: number[] = [];
    let last;
    for (let i = 0; i < 7; i++) {
      last = await app.inject({ method: 'POST', url: '/v1/search', headers: json, payload: '{"query":"bikes"}', remoteAddress: '10.9.9.9' });
      statuses.push(last.statusCode);
    }
    expect(statuses.slice(0, 5).every((s) => s === 200)).toBe(true);
    expect(statuses[6]).toBe(429);
    expect(last!.json().error.code).toBe('SB_ERR_RATE_LIMITED');
    expect(Number(last!.headers['retry-after'])).toBeGreaterThan(0);
    // Health checks are never rate limited.
    for (let i = 0; i < 10; i++) expect((await app.inject({ method: 'GET', url: '/health', remoteAddress: '10.9.9.9' })).statusCode).toBe(200);
  });
});
