import vm from 'node:vm';
import v8 from 'node:v8';
import fc from 'fast-check';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

// Property-based fuzzing with fast-check: every route gets schema-shaped bodies with hostile values,
// arbitrary JSON and arbitrary bytes under arbitrary content types. Nothing may produce a 5xx.

v8.setFlagsFromString('--expose-gc');
const gc = vm.runInNewContext('gc') as () => void;

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;

beforeAll(async () => {
  const made = await tempRuntime({ limits: { rateLimitPerMinute: 1_000_000 }, server: { bodyLimitBytes: 65_536 } }, {});
  rt = made.rt;
  cleanup = made.cleanup;
  app = buildApp(made.config, appDeps(rt, () => true));
  await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
  await app.ready();
});
afterAll(async () => {
  await app.close();
  cleanup();
});

const hostileString = fc.oneof(
  fc.string({ unit: 'binary', maxLength: 300 }),
  fc.constantFrom('', ' ', '"', "'", '\\', '*', 'NEAR(', 'a OR', 'title:x', '../../etc/passwd', '\u0000', '\uFFFF', '💥'.repeat(50), 'x'.repeat(2500), '<script>alert(1)</script>', 'DROP TABLE chunks;--'),
);
const anything = fc.oneof(hostileString, fc.integer(), fc.double(), fc.boolean(), fc.constant(null), fc.array(fc.jsonValue(), { maxLength: 3 }), fc.jsonValue());
const searchLike = fc.record({ query: anything, collection: anything, k: anything, mode: anything }, { requiredKeys: [] });
const answerLike = fc.record(
  {
    question: anything,
    collection: fc.oneof(anything, fc.constant('default')),
    history: fc.oneof(anything, fc.array(fc.record({ role: fc.oneof(fc.constantFrom('user', 'assistant'), anything), content: anything }), { maxLength: 4 })),
    k: fc.oneof(anything, fc.integer({ min: -5, max: 100 })),
    mode: fc.oneof(anything, fc.constantFrom('hybrid', 'lexical', 'dense', 'extractive', 'auto')),
  },
  { requiredKeys: [] },
);
const route = fc.constantFrom('/v1/search', '/v1/answer', '/v1/collections', '/health', '/ready', '/metrics', '/v1/nothing', '/v1/answer?x=1', '/%2e%2e/etc');
const method = fc.constantFrom('GET', 'POST', 'PUT', 'DELETE', 'PATCH');
const contentType = fc.constantFrom('application/json', 'application/json; charset=utf-8', 'text/plain', 'application/octet-stream', 'multipart/form-data; boundary=x', '', 'application/x-www-form-urlencoded');
const payload = fc.oneof(
  searchLike.map((b) => JSON.stringify(b)),
  answerLike.map((b) => JSON.stringify(b)),
  fc.jsonValue().map((v) => JSON.stringify(v)),
  fc.uint8Array({ maxLength: 2048 }).map((b) => Buffer.from(b)),
  fc.string({ maxLength: 500 }),
);

describe('fuzzing every route', () => {
  it('answers at least 2,000 hostile requests without a 5xx, and memory returns near its baseline', async () => {
    gc();
    const baseline = process.memoryUsage().heapUsed;
    let requests = 0;
    const serverErrors: string[] = [];
    await fc.assert(
      fc.asyncProperty(method, route, contentType, payload, async (m, url, ct, body) => {
        const res = await app.inject({
          method: m as 'GET',
          url,
          headers: ct ? { 'content-type': ct } : {},
          ...(m === 'GET' ? {} : { payload: body }),
        });
        requests++;
        if (res.statusCode >= 500) serverErrors.push(`${m} ${url} ${ct} -> ${res.statusCode} ${res.body.slice(0, 200)}`);
        expect(res.statusCode).toBeLessThan(500);
        // Every answer, errors included, is JSON — except a successful /metrics, which is Prometheus text.
        if (!(url === '/metrics' && res.statusCode === 200)) expect(() => JSON.parse(res.body)).not.toThrow();
      }),
      { numRuns: 2200, seed: 20261202 },
    );
    expect(serverErrors).toEqual([]);
    expect(requests).toBeGreaterThanOrEqual(2000);
    // The service is still alive and serving.
    expect((await app.inject({ method: 'GET', url: '/health' })).statusCode).toBe(200);
    gc();
    const after = process.memoryUsage().heapUsed;
    expect(after - baseline).toBeLessThan(50 * 1024 * 1024);
  }, 240_000);
});
