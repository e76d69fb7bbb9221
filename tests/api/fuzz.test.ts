import vm from 'node:vm';
import v8 from 'node:v8';
import fc from 'fast-check';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import type { JobQueue } from '../../src/jobs/index.js';
import { appDeps, createDocumentApi, type Runtime } from '../../src/runtime.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

// Property-based fuzzing with fast-check: every route gets schema-shaped bodies with hostile values,
// arbitrary JSON and arbitrary bytes under arbitrary content types. Nothing may produce a 5xx.

v8.setFlagsFromString('--expose-gc');
const gc = vm.runInNewContext('gc') as () => void;

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;
let queue: JobQueue;
let docId = 'none';

beforeAll(async () => {
  const made = await tempRuntime({ limits: { rateLimitPerMinute: 1_000_000 }, server: { bodyLimitBytes: 65_536 } }, {});
  rt = made.rt;
  cleanup = made.cleanup;
  // The whole surface: search and answer, the document API and its jobs (run inline), and the desk's routes.
  const api = createDocumentApi(rt, 'inline');
  queue = api.queue;
  app = buildApp(made.config, appDeps(rt, () => true, api.documents));
  await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
  docId = rt.repo.listDocuments('default')[0]!.id;
  await app.ready();
});
afterAll(async () => {
  await app.close();
  await queue.close();
  cleanup();
});

const hostileString = fc.oneof(
  fc.string({ unit: 'binary', maxLength: 300 }),
  fc.constantFrom('', ' ', '"', "'", '\\', '*', 'NEAR(', 'a OR', 'title:x', '../../etc/passwd', '\u0000', '\uFFFF', '💥'.repeat(50), 'x'.repeat(2500), '<script>alert(1)</script>', 'DROP TABLE chunks;--'),
);
const anything = fc.oneof(hostileString, fc.integer(), fc.double(), fc.boolean(), fc.constant(null), fc.array(fc.jsonValue(), { maxLength: 3 }), fc.jsonValue());
const filterLike = fc.oneof(
  anything,
  fc.record({ documentIds: fc.oneof(anything, fc.array(hostileString, { maxLength: 3 })), metadata: fc.oneof(anything, fc.dictionary(hostileString, hostileString, { maxKeys: 3 })) }, { requiredKeys: [] }),
);
const searchLike = fc.record({ query: anything, collection: anything, k: anything, mode: anything, filter: filterLike }, { requiredKeys: [] });
const answerLike = fc.record(
  {
    question: anything,
    collection: fc.oneof(anything, fc.constant('default')),
    history: fc.oneof(anything, fc.array(fc.record({ role: fc.oneof(fc.constantFrom('user', 'assistant'), anything), content: anything }), { maxLength: 4 })),
    k: fc.oneof(anything, fc.integer({ min: -5, max: 100 })),
    mode: fc.oneof(anything, fc.constantFrom('hybrid', 'lexical', 'dense', 'extractive', 'auto')),
    filter: filterLike,
  },
  { requiredKeys: [] },
);
const uploadLike = fc.record(
  { name: anything, text: anything, metadata: fc.oneof(anything, fc.dictionary(hostileString, anything, { maxKeys: 3 })) },
  { requiredKeys: [] },
);
const ratingLike = fc.record(
  { helpful: anything, comment: anything, question: anything, answer: anything, collection: anything, citations: fc.oneof(anything, fc.array(fc.jsonValue(), { maxLength: 3 })) },
  { requiredKeys: [] },
);
const offset = fc.oneof(fc.integer({ min: -10, max: 100_000 }), hostileString);
// Routes are drawn when the property runs, so the document id found after ingest can be used.
const route = fc.oneof(
  fc.constantFrom(
    '/v1/search', '/v1/answer', '/v1/collections', '/health', '/ready', '/metrics', '/v1/nothing', '/v1/answer?x=1', '/%2e%2e/etc',
    '/v1/collections/default/documents', '/v1/collections/..%2F..%2Fetc/documents', '/v1/collections/nope/documents',
    '/v1/jobs/1', '/v1/jobs/..%2F1', '/v1/jobs/999999999999999999999', '/v1/reindex', '/v1/ratings', '/', '/desk/desk.js',
    '/desk/..%2F..%2Fpackage.json', '/originals', '/originals?link=x.y', '/v1/collections/default/documents/%00',
  ),
  fc.constantFrom('', '/passage', '/original', '/original-link').map((tail) => () => `/v1/collections/default/documents/${docId}${tail}`),
  fc.tuple(offset, offset).map(([a, b]) => () => `/v1/collections/default/documents/${docId}/passage?start=${encodeURIComponent(String(a))}&end=${encodeURIComponent(String(b))}`),
);
const method = fc.constantFrom('GET', 'POST', 'PUT', 'DELETE', 'PATCH');
const contentType = fc.constantFrom('application/json', 'application/json; charset=utf-8', 'text/plain', 'application/octet-stream', 'multipart/form-data; boundary=x', '', 'application/x-www-form-urlencoded');
const payload = fc.oneof(
  searchLike.map((b) => JSON.stringify(b)),
  answerLike.map((b) => JSON.stringify(b)),
  uploadLike.map((b) => JSON.stringify(b)),
  ratingLike.map((b) => JSON.stringify(b)),
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
      fc.asyncProperty(method, route, contentType, payload, async (m, drawn, ct, body) => {
        const url = typeof drawn === 'function' ? drawn() : drawn;
        const res = await app.inject({
          method: m as 'GET',
          url,
          headers: ct ? { 'content-type': ct } : {},
          ...(m === 'GET' ? {} : { payload: body }),
        });
        requests++;
        if (res.statusCode >= 500) serverErrors.push(`${m} ${url} ${ct} -> ${res.statusCode} ${res.body.slice(0, 200)}`);
        expect(res.statusCode).toBeLessThan(500);
        // Every answer, errors included, is JSON — except successful non-JSON content: /metrics (Prometheus
        // text), the desk's page and scripts, and original files.
        const type = String(res.headers['content-type'] ?? '');
        if (res.statusCode >= 400 || type.includes('json')) expect(() => JSON.parse(res.body)).not.toThrow();
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
