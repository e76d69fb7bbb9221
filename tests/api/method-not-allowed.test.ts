import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { sha256Hex } from '../../src/api/auth.js';
import { routeTable } from '../../src/api/access.js';
import { appDeps } from '../../src/runtime.js';
import { tempRuntime } from '../fixtures/runtime.js';

// docs/errors.md: a route that exists but not for this method is 405 SB_ERR_METHOD_NOT_ALLOWED, decided on the
// route the router matched. With keys required, a caller without one learns nothing more than on any route.

const KEY = 'sbk_reader-of-every-collection';
let app: FastifyInstance;
let open: FastifyInstance;
let cleanup: () => void;

beforeAll(async () => {
  const made = await tempRuntime({ auth: { required: true, keys: [{ id: 'reader', sha256: sha256Hex(KEY), scopes: ['query'], collections: ['*'] }] } });
  cleanup = made.cleanup;
  app = buildApp(made.config, appDeps(made.rt, () => true));
  open = buildApp({ ...made.config, auth: { ...made.config.auth, required: false, keys: [] } }, appDeps(made.rt, () => true));
  await Promise.all([app.ready(), open.ready()]);
});
afterAll(async () => {
  await app.close();
  await open.close();
  cleanup();
});

const auth = { authorization: `Bearer ${KEY}` };

describe('a known path with the wrong method', () => {
  it('is 405 SB_ERR_METHOD_NOT_ALLOWED with an Allow header, for GET, PUT and DELETE on /v1/answer', async () => {
    for (const method of ['GET', 'PUT', 'DELETE'] as const) {
      const res = await app.inject({ method, url: '/v1/answer', headers: auth });
      expect(res.statusCode, method).toBe(405);
      expect(res.json().error.code).toBe('SB_ERR_METHOD_NOT_ALLOWED');
      expect(res.headers.allow).toBe('POST');
    }
  });

  it('is decided on the matched route: a percent-escaped spelling of the path is 405 too, an unknown path 404', async () => {
    expect((await app.inject({ method: 'GET', url: '/v1/%61nswer', headers: auth })).statusCode).toBe(405);
    expect((await app.inject({ method: 'GET', url: '/v1/answers', headers: auth })).statusCode).toBe(404);
  });

  it('asks for a key first where the path needs one, and answers anyone on a public path', async () => {
    const res = await app.inject({ method: 'GET', url: '/v1/answer' });
    expect(res.statusCode).toBe(401);
    const health = await app.inject({ method: 'POST', url: '/health' });
    expect(health.statusCode).toBe(405);
    expect(health.headers.allow).toBe('GET, HEAD');
    expect((await open.inject({ method: 'DELETE', url: '/v1/search' })).statusCode).toBe(405);
  });

  it('keeps the 405 routes out of the route table that access checks and the API description are built from', () => {
    const answer = routeTable(app).filter((r) => r.url === '/v1/answer').map((r) => r.method);
    expect(answer).toEqual(['POST']);
  });
});
