import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FastifyInstance } from 'fastify';
import { buildApp } from '../../src/api/app.js';
import { CAUTION } from '../../src/answer/caution.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import type { Config } from '../../src/config/index.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

let rt: Runtime;
let config: Readonly<Config>;
let app: FastifyInstance;
let cleanup: () => void;
let ready = false;

beforeAll(async () => {
  ({ rt, config, cleanup } = await tempRuntime({ server: { bodyLimitBytes: 4096 } }));
  app = buildApp(config, appDeps(rt, () => ready));
  await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
  ready = true;
});

afterAll(async () => {
  await app.close();
  cleanup();
});

const post = (url: string, payload: unknown, headers: Record<string, string> = {}) =>
  app.inject({ method: 'POST', url, payload: typeof payload === 'string' ? payload : JSON.stringify(payload), headers: { 'content-type': 'application/json', ...headers } });

describe('health and readiness', () => {
  it('reports ok with the active embedder and whether it is semantic', async () => {
    const res = await app.inject({ method: 'GET', url: '/health' });
    expect(res.statusCode).toBe(200);
    const body = res.json();
    expect(body.status).toBe('ok');
    expect(body.embedder.id).toBe('hashing-v1-4096');
    expect(body.embedder.semantic).toBe(false);
  });

  it('answers 503 on /ready and on queries until the index is loaded', async () => {
    ready = false;
    try {
      expect((await app.inject({ method: 'GET', url: '/ready' })).statusCode).toBe(503);
      const res = await post('/v1/search', { query: 'refund' });
      expect(res.statusCode).toBe(503);
      expect(res.json().error.code).toBe('SB_ERR_NOT_READY');
    } finally {
      ready = true;
    }
    expect((await app.inject({ method: 'GET', url: '/ready' })).statusCode).toBe(200);
  });
});

describe('POST /v1/search', () => {
  it('returns chunks with document, source, page, section and score', async () => {
    const res = await post('/v1/search', { query: 'delay refund claim within days', k: 5 });
    expect(res.statusCode).toBe(200);
    const { results } = res.json();
    expect(results.length).toBeGreaterThan(0);
    expect(results.length).toBeLessThanOrEqual(5);
    for (const r of results) {
      expect(r).toMatchObject({ chunkId: expect.any(Number), documentId: expect.any(String), source: expect.any(String), title: expect.any(String), text: expect.any(String), score: expect.any(Number) });
      expect('page' in r && 'section' in r).toBe(true);
    }
    expect(results[0].source).toMatch(/delay-refunds/);
  });

  it('answers every mode, and lexical finds a word only one document has', async () => {
    for (const mode of ['lexical', 'dense', 'hybrid']) {
      const res = await post('/v1/search', { query: 'overhead line isolation', mode });
      expect(res.statusCode, mode).toBe(200);
      expect(res.json().results[0].source, mode).toBe('tram-depot-safety-procedures.pdf');
    }
  });

  it('treats FTS5 syntax in the query as plain words', async () => {
    for (const query of ['"unbalanced quote', 'refund AND OR NOT', 'title:refund', 'a* (b', 'NEAR(x y)', '^ - +', '***']) {
      const res = await post('/v1/search', { query });
      expect(res.statusCode, query).toBe(200);
    }
  });
});

describe('POST /v1/answer', () => {
  it('answers a demo question with a citation whose quote is verbatim in the cited document', async () => {
    const res = await post('/v1/answer', { question: 'Can I bring an assistance dog on the tram?' });
    expect(res.statusCode).toBe(200);
    const body = res.json();
    expect(body.abstained).toBe(false);
    expect(body.mode).toBe('extractive');
    expect(body.caution).toBe(CAUTION);
    expect(body.caution).toContain('It is not legal or medical advice.');
    expect(body.citations.length).toBeGreaterThan(0);
    for (const c of body.citations) {
      const text = rt.repo.getDocumentText(c.documentId)!;
      expect(text).toContain(c.quote);
      expect(c).toMatchObject({ n: expect.any(Number), source: expect.any(String), title: expect.any(String) });
    }
    // Both documents state the assistance-dog rule.
    expect(['accessibility-assistance.html', 'conditions-of-carriage.txt']).toContain(body.citations[0].source);
    expect(body.timings).toMatchObject({ totalMs: expect.any(Number) });
  });

  it('abstains with a plain sentence when the documents do not cover the question', async () => {
    const res = await post('/v1/answer', { question: 'Who won the football league in 1987?' });
    expect(res.statusCode).toBe(200);
    const body = res.json();
    expect(body.abstained).toBe(true);
    expect(body.citations).toEqual([]);
    expect(body.answer.length).toBeGreaterThan(10);
    expect(body.caution).toBe(CAUTION);
  });
});

describe('bad input gets a clear 4xx, never a 5xx', () => {
  const cases: [string, unknown, number, string][] = [
    ['an empty question', { question: '' }, 400, 'SB_ERR_VALIDATION'],
    ['a blank question', { question: '   ' }, 400, 'SB_ERR_VALIDATION'],
    ['a missing question', {}, 400, 'SB_ERR_VALIDATION'],
    ['a question of the wrong type', { question: 42 }, 400, 'SB_ERR_VALIDATION'],
    ['k of the wrong type', { question: 'refund', k: 'ten' }, 400, 'SB_ERR_VALIDATION'],
    ['k of zero', { question: 'refund', k: 0 }, 400, 'SB_ERR_VALIDATION'],
    ['an unknown mode', { question: 'refund', mode: 'psychic' }, 400, 'SB_ERR_VALIDATION'],
    ['an unknown field', { question: 'refund', colour: 'red' }, 400, 'SB_ERR_VALIDATION'],
    ['history of the wrong shape', { question: 'refund', history: [{ role: 'robot', content: 1 }] }, 400, 'SB_ERR_VALIDATION'],
    ['an unknown collection', { question: 'refund', collection: 'nope' }, 404, 'SB_ERR_UNKNOWN_COLLECTION'],
    ['a collection name with a path in it', { question: 'refund', collection: '../etc' }, 400, 'SB_ERR_VALIDATION'],
    ['a JSON array body', [1, 2], 400, 'SB_ERR_VALIDATION'],
    ['a JSON string body', '"just text"', 400, 'SB_ERR_VALIDATION'],
    ['malformed JSON', '{"question": ', 400, 'SB_ERR_MALFORMED_JSON'],
  ];
  for (const [name, payload, status, code] of cases) {
    it(`answers ${status} ${code} to ${name}`, async () => {
      const res = await post('/v1/answer', payload);
      expect(res.statusCode).toBe(status);
      const body = res.json();
      expect(body.error.code).toBe(code);
      expect(typeof body.error.message).toBe('string');
      expect(body.error.message.length).toBeGreaterThan(5);
    });
  }

  it('names the offending field in structured validation details', async () => {
    const res = await post('/v1/answer', { question: 'refund', k: 'ten' });
    expect(res.json().error.details.issues[0].path).toEqual(['k']);
  });

  it('accepts a question at the length limit and refuses one character more', async () => {
    const max = config.limits.questionMaxChars;
    const bodyLimitFriendly = async (len: number) => {
      // The body limit of this app is 4096 bytes, above the question limit of 2000 characters.
      return post('/v1/search', { query: 'r'.repeat(len) });
    };
    expect((await bodyLimitFriendly(max)).statusCode).toBe(200);
    const over = await bodyLimitFriendly(max + 1);
    expect(over.statusCode).toBe(400);
    expect(over.json().error.details.issues[0].path).toEqual(['query']);
  });

  it('accepts k at its limit and refuses one more', async () => {
    expect((await post('/v1/search', { query: 'refund', k: config.limits.kMax })).statusCode).toBe(200);
    expect((await post('/v1/search', { query: 'refund', k: config.limits.kMax + 1 })).statusCode).toBe(400);
  });

  it('refuses an oversized body with 413 SB_ERR_BODY_TOO_LARGE', async () => {
    const res = await post('/v1/answer', { question: 'x'.repeat(5000) });
    expect(res.statusCode).toBe(413);
    expect(res.json().error.code).toBe('SB_ERR_BODY_TOO_LARGE');
  });

  it('refuses a body that is not JSON with 415', async () => {
    const res = await app.inject({ method: 'POST', url: '/v1/answer', payload: 'question=hi', headers: { 'content-type': 'text/plain' } });
    expect(res.statusCode).toBe(415);
    expect(res.json().error.code).toBe('SB_ERR_UNSUPPORTED_MEDIA_TYPE');
  });

  it('answers 400 to an empty JSON body', async () => {
    const res = await app.inject({ method: 'POST', url: '/v1/answer', payload: '', headers: { 'content-type': 'application/json' } });
    expect(res.statusCode).toBe(400);
  });

  it('answers 404 with an error body for an unknown route', async () => {
    const res = await app.inject({ method: 'GET', url: '/v2/nothing' });
    expect(res.statusCode).toBe(404);
    expect(res.json().error.code).toBe('SB_ERR_NOT_FOUND');
  });
});
