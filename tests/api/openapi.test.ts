// GET /v1/openapi.json: a valid OpenAPI 3.1 document (checked by @seriousme/openapi-schema-validator against
// the OpenAPI Initiative's published 3.1 schema) that names exactly the routes the router holds, and whose
// reply schemas the service's real replies satisfy (checked with Ajv's JSON Schema 2020-12 validator, the
// dialect OpenAPI 3.1 uses).
import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { Validator } from '@seriousme/openapi-schema-validator';
import { Ajv2020 } from 'ajv/dist/2020.js';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { z } from 'zod';
import { routeTable } from '../../src/api/access.js';
import { buildApp } from '../../src/api/app.js';
import { sha256Hex } from '../../src/api/auth.js';
import type { Passage } from '../../src/api/desk-service.js';
import { openApiPath } from '../../src/api/openapi.js';
import { describedRoutes } from '../../src/api/openapi-routes.js';
import type * as replies from '../../src/api/replies.js';
import type { AnswerReply, SourceSummary } from '../../src/answer/types.js';
import type { Config } from '../../src/config/index.js';
import type { DocumentSummary, JobQueue } from '../../src/jobs/index.js';
import { appDeps, createDocumentApi, type Runtime } from '../../src/runtime.js';
import type { JobRecord } from '../../src/store/index.js';
import type { Citation } from '../../src/types.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { waitFor } from '../fixtures/wait.js';

// Compile-time: what the stages produce fits the reply schemas the document and the desk page are built from
// (`npm run typecheck` fails on a field renamed, retyped or made optional on one side only).
type Fits<T, Schema extends z.ZodType> = T extends z.input<Schema> ? true : false;
const fits: [
  Fits<AnswerReply, typeof replies.answerReply>,
  Fits<Citation, typeof replies.citation>,
  Fits<SourceSummary, typeof replies.sourceSummary>,
  Fits<Passage, typeof replies.passage>,
  Fits<DocumentSummary, typeof replies.documentSummary>,
  Fits<Omit<JobRecord, 'payload'>, typeof replies.jobReply>,
] = [true, true, true, true, true, true];

const KEY = 'sbk_openapi-reader-every-scope';
let rt: Runtime;
let config: Readonly<Config>;
let app: FastifyInstance;
let queue: JobQueue;
let cleanup: () => void;
let folder: string;
let doc: OpenApi;

interface OpenApi {
  openapi: string;
  paths: Record<string, Record<string, { responses: Record<string, { content?: Record<string, { schema?: object }> }> }>>;
  components: { schemas: Record<string, object> };
}

const auth = { authorization: `Bearer ${KEY}` };

beforeAll(async () => {
  folder = mkdtempSync(path.join(tmpdir(), 'sb-openapi-'));
  mkdirSync(path.join(folder, 'docs'));
  writeFileSync(path.join(folder, 'docs', 'lost-property.md'), '# Lost property\n\nFound items are kept for 30 days at the depot office.\n');
  writeFileSync(path.join(folder, 'index.html'), '<!doctype html><title>desk</title>');
  const made = await tempRuntime({
    auth: { required: true, keys: [{ id: 'reader', sha256: sha256Hex(KEY), scopes: ['query', 'ingest', 'admin'], collections: ['*'] }] },
    limits: { rateLimitPerMinute: 1_000_000 },
  });
  ({ rt, config, cleanup } = made);
  const api = createDocumentApi(rt, 'inline');
  queue = api.queue;
  app = buildApp(config, { ...appDeps(rt, () => true, api.documents), deskAssetsDir: folder });
  await app.ready();
  await rt.ingestor.ingestPath(path.join(folder, 'docs'), { collection: 'home' });
  const res = await app.inject({ method: 'GET', url: '/v1/openapi.json', headers: auth });
  expect(res.statusCode, res.body).toBe(200);
  expect(res.headers['content-type']).toMatch(/^application\/json/);
  doc = res.json();
});

afterAll(async () => {
  await app?.close();
  await queue?.close();
  cleanup?.();
  rmSync(folder, { recursive: true, force: true });
});

describe('GET /v1/openapi.json', () => {
  it('is refused without a key (any scope may read it)', async () => {
    const res = await app.inject({ method: 'GET', url: '/v1/openapi.json' });
    expect(res.statusCode).toBe(401);
    expect(res.json().error.code).toBe('SB_ERR_UNAUTHORIZED');
  });

  it('is a valid OpenAPI 3.1 document', async () => {
    expect(fits.every(Boolean)).toBe(true);
    const validator = new Validator();
    const result = await validator.validate(doc as unknown as Record<string, unknown>);
    expect(result.errors ?? [], JSON.stringify(result.errors, null, 1)).toEqual([]);
    expect(result.valid).toBe(true);
    expect(validator.version).toBe('3.1');
    // The validator does refuse a broken document: without its info object, or with a path not starting with "/".
    const { info: _info, ...noInfo } = doc as unknown as Record<string, unknown>;
    expect((await new Validator().validate(noInfo)).valid).toBe(false);
    expect((await new Validator().validate({ ...doc, paths: { 'v1/answer': {} } } as unknown as Record<string, unknown>)).valid).toBe(false);
    // Every schema in it is a schema the 2020-12 dialect compiles.
    const ajv = new Ajv2020({ strict: false });
    for (const [p, methods] of Object.entries(doc.paths)) {
      for (const [m, op] of Object.entries(methods)) {
        for (const [status, r] of Object.entries(op.responses)) {
          for (const media of Object.values(r.content ?? {})) {
            if (media.schema && !('$ref' in media.schema)) expect(() => ajv.compile(media.schema!), `${m} ${p} ${status}`).not.toThrow();
          }
        }
      }
    }
  });

  it("names every route the router holds, in OpenAPI's path form, and nothing else", () => {
    const router = routeTable(app).map((r) => `${r.method.toLowerCase()} ${openApiPath(r.url)}`);
    const documented = Object.entries(doc.paths).flatMap(([p, methods]) => Object.keys(methods).map((m) => `${m} ${p}`));
    expect(new Set(router).size).toBe(router.length);
    expect([...documented].sort()).toEqual([...router].sort());
    expect(documented).toContain('get /v1/collections/{collection}/documents/{id}/passage');
    expect(documented).toContain('post /v1/answer');
    expect(documented).toContain('get /v1/openapi.json');
    expect(Object.keys(doc.paths).filter((p) => p.includes(':'))).toEqual([]);
  });

  it('describes every route from its own entry, and has no entry for a route the router lacks', () => {
    const described = Object.keys(describedRoutes(config.limits));
    const routes = routeTable(app).map((r) => `${r.method} ${r.url}`);
    expect(routes.filter((r) => !r.startsWith('HEAD ') && !described.includes(r))).toEqual([]);
    expect(described.filter((d) => !routes.includes(d))).toEqual([]);
  });

  it("states each route's access as the router holds it", () => {
    for (const r of routeTable(app)) {
      const op = doc.paths[openApiPath(r.url)]![r.method.toLowerCase()] as unknown as { security: unknown[]; responses: Record<string, unknown> };
      expect(op.security.length > 0, `${r.method} ${r.url}`).toBe(r.access?.kind === 'key');
      expect('401' in op.responses, `${r.method} ${r.url}`).toBe(r.access?.kind === 'key');
    }
  });
});

describe('the real replies', () => {
  const ajv = new Ajv2020({ strict: false });
  function check(method: string, url: string, status: number, body: unknown): void {
    const op = doc.paths[url]?.[method];
    const schema = op?.responses[String(status)]?.content?.['application/json']?.schema as Record<string, unknown> | undefined;
    expect(schema, `${method} ${url} ${status} has a JSON schema`).toBeDefined();
    const resolved = schema!.$ref === '#/components/schemas/Error' ? doc.components.schemas.Error! : schema!;
    const validate = ajv.compile(resolved);
    expect(validate(body), `${method} ${url} ${status}: ${JSON.stringify(validate.errors)}`).toBe(true);
  }

  it('match the schemas the document gives for them', async () => {
    const answer = await app.inject({ method: 'POST', url: '/v1/answer', headers: auth, payload: { question: 'How long are found items kept?', collection: 'home' } });
    expect(answer.statusCode, answer.body).toBe(200);
    check('post', '/v1/answer', 200, answer.json());

    const search = await app.inject({ method: 'POST', url: '/v1/search', headers: auth, payload: { query: 'found items', collection: 'home' } });
    expect(search.json().results.length).toBeGreaterThan(0);
    check('post', '/v1/search', 200, search.json());

    const docs = await app.inject({ method: 'GET', url: '/v1/collections/home/documents', headers: auth });
    check('get', '/v1/collections/{collection}/documents', 200, docs.json());
    const id = docs.json().documents[0].id as string;
    const passage = await app.inject({ method: 'GET', url: `/v1/collections/home/documents/${id}/passage?start=0&end=10`, headers: auth });
    expect(passage.statusCode, passage.body).toBe(200);
    check('get', '/v1/collections/{collection}/documents/{id}/passage', 200, passage.json());

    for (const [url, path] of [['/v1/collections', '/v1/collections'], ['/ready', '/ready'], ['/health', '/health']] as const) {
      const res = await app.inject({ method: 'GET', url, headers: auth });
      check('get', path, 200, res.json());
    }

    const upload = await app.inject({ method: 'POST', url: '/v1/collections/home/documents', headers: auth, payload: { name: 'bikes.md', text: '# Bikes\n\nFolded bikes travel free.\n' } });
    expect(upload.statusCode, upload.body).toBe(202);
    check('post', '/v1/collections/{collection}/documents', 202, upload.json());
    const job = await app.inject({ method: 'GET', url: `/v1/jobs/${upload.json().jobId}`, headers: auth });
    check('get', '/v1/jobs/{jobId}', 200, job.json());
    // The job runs to its end before the store is closed.
    const finished = await waitFor(
      async () => {
        const j = (await app.inject({ method: 'GET', url: `/v1/jobs/${upload.json().jobId}`, headers: auth })).json();
        return j.state === 'succeeded' || j.state === 'failed' ? j : null;
      },
      { what: 'the upload job to finish' },
    );
    expect(finished.state).toBe('succeeded');
    check('get', '/v1/jobs/{jobId}', 200, finished);

    const refused = await app.inject({ method: 'POST', url: '/v1/search', headers: auth, payload: { query: '' } });
    expect(refused.statusCode).toBe(400);
    check('post', '/v1/search', 400, refused.json());
  });
});
