import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

// `filter` on /v1/search and /v1/answer narrows retrieval to some documents (by id or by metadata the
// documents state, e.g. Markdown front matter), applied inside the search so k results still come back.

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;
const idOf = (source: string) => rt.repo.listDocuments('default').find((d) => d.source === source)!.id;

beforeAll(async () => {
  const made = await tempRuntime({ seed: { ingestOnEmpty: false } });
  rt = made.rt;
  cleanup = made.cleanup;
  await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
  app = buildApp(made.config, appDeps(rt, () => true));
  await app.ready();
});
afterAll(async () => {
  await app.close();
  cleanup();
});

const post = async (url: string, payload: unknown) => {
  const res = await app.inject({ method: 'POST', url, payload: payload as object });
  return { status: res.statusCode, body: res.json() as Record<string, any> };
};

describe('filter', () => {
  it('keeps search to the named documents and still fills k', async () => {
    const target = idOf('delay-refunds-2025.md');
    const { status, body } = await post('/v1/search', { query: 'refund', k: 3, filter: { documentIds: [target] } });
    expect(status).toBe(200);
    expect(body.results).toHaveLength(3);
    expect(body.results.every((r: { documentId: string }) => r.documentId === target)).toBe(true);
  });

  it('filters by a metadata value the documents state', async () => {
    const owners = rt.repo.listDocuments('default').map((d) => d.metadata['owner']).filter(Boolean);
    const owner = owners[0]!;
    const allowed = new Set(rt.repo.listDocuments('default').filter((d) => d.metadata['owner'] === owner).map((d) => d.id));
    const { status, body } = await post('/v1/search', { query: 'how do I claim', k: 5, mode: 'hybrid', filter: { metadata: { owner } } });
    expect(status).toBe(200);
    expect(body.results.length).toBeGreaterThan(0);
    for (const r of body.results) expect(allowed.has(r.documentId)).toBe(true);
  });

  it('answers from the filtered documents only', async () => {
    const old = idOf('delay-refunds-2025.md');
    const { status, body } = await post('/v1/answer', { question: 'How long do I have to make a claim for a delay refund?', filter: { documentIds: [old] } });
    expect(status).toBe(200);
    expect(body.abstained).toBe(false);
    expect(body.citations.length).toBeGreaterThan(0);
    for (const c of body.citations) expect(c.source).toBe('delay-refunds-2025.md');
  });

  it('refuses a malformed filter with 400 and says which field', async () => {
    for (const filter of [{ documentIds: [] }, { documentIds: 'x' }, { metadata: { owner: 3 } }, { unknown: true }]) {
      const { status, body } = await post('/v1/search', { query: 'refund', filter });
      expect(status).toBe(400);
      expect(body.error.code).toBe('SB_ERR_VALIDATION');
      expect(JSON.stringify(body.error)).toContain('filter');
    }
  });

  it('never reaches another collection through a document id', async () => {
    await rt.ingestor.ingestPath(SEED_DIR, { collection: 'other' });
    const foreign = rt.repo.listDocuments('other')[0]!.id;
    const { status, body } = await post('/v1/search', { query: 'refund', filter: { documentIds: [foreign] } });
    expect(status).toBe(200);
    expect(body.results).toEqual([]);
  });
});
