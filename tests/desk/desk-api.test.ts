import { cpSync, mkdtempSync, rmSync, symlinkSync, writeFileSync, appendFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { createHash } from 'node:crypto';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { createDeskService, LINK_TTL_MS } from '../../src/api/desk-service.js';
import { DESK_CSP } from '../../src/api/desk-static.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { tempRuntime } from '../fixtures/runtime.js';

// The desk's HTTP surface through inject(): passages in context, originals (key, link, confinement),
// ratings, and the page itself. Auth on: one key for collection "alpha", one for "beta".

const FIXTURES = path.resolve(import.meta.dirname, '..', 'fixtures', 'ingest');
const ALPHA_KEY = 'sbk_alpha-reader';
const BETA_KEY = 'sbk_beta-reader';
const sha = (s: string) => createHash('sha256').update(s).digest('hex');

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;
let folder: string;
let deskDir: string;
let docId = '';

const auth = (key: string) => ({ authorization: `Bearer ${key}` });

beforeAll(async () => {
  folder = mkdtempSync(path.join(tmpdir(), 'sb-desk-src-'));
  cpSync(FIXTURES, folder, { recursive: true });
  deskDir = mkdtempSync(path.join(tmpdir(), 'sb-desk-web-'));
  writeFileSync(path.join(deskDir, 'index.html'), '<!doctype html><title>desk</title>');
  writeFileSync(path.join(deskDir, 'desk.js'), 'export {};');
  const made = await tempRuntime({
    auth: {
      required: true,
      keys: [
        { id: 'alpha-staff', sha256: sha(ALPHA_KEY), scopes: ['query'], collections: ['alpha'] },
        { id: 'beta-staff', sha256: sha(BETA_KEY), scopes: ['query'], collections: ['beta'] },
      ],
    },
  });
  rt = made.rt;
  cleanup = made.cleanup;
  await rt.ingestor.ingestPath(folder, { collection: 'alpha' });
  await rt.ingestor.ingestPath(folder, { collection: 'beta' });
  app = buildApp(made.config, { ...appDeps(rt, () => true), deskAssetsDir: deskDir });
  docId = rt.repo.getDocumentBySource('alpha', 'lost-property.txt')!.id;
});

afterAll(async () => {
  await app?.close();
  cleanup?.();
  rmSync(folder, { recursive: true, force: true });
  rmSync(deskDir, { recursive: true, force: true });
});

describe('GET .../documents/:id/passage', () => {
  it('returns the span with the text around it, exactly as in the document', async () => {
    const text = rt.repo.getDocumentText(docId)!;
    const start = text.indexOf('30 days') >= 0 ? text.indexOf('30 days') : 10;
    const end = start + 7;
    const res = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/passage?start=${start}&end=${end}`, headers: auth(ALPHA_KEY) });
    expect(res.statusCode).toBe(200);
    const p = res.json();
    expect(p.quote).toBe(text.slice(start, end));
    expect(p.before + p.quote + p.after).toBe(text.slice(p.contextStart, p.contextEnd));
    expect(p.before.length + p.after.length).toBeGreaterThan(0);
    expect(p.title).toBeTruthy();
    expect(typeof p.section).toBe('string');
  });

  it('refuses a span outside the document with SB_ERR_VALIDATION', async () => {
    const len = rt.repo.getDocumentText(docId)!.length;
    for (const q of [`start=5&end=5`, `start=0&end=${len + 1}`, `start=-1&end=3`, `start=a&end=3`, 'start=1']) {
      const res = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/passage?${q}`, headers: auth(ALPHA_KEY) });
      expect(res.statusCode, q).toBe(400);
      expect(res.json().error.code).toBe('SB_ERR_VALIDATION');
    }
    const atLimit = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/passage?start=0&end=${len}`, headers: auth(ALPHA_KEY) });
    expect(atLimit.statusCode).toBe(200);
  });

  it('hides other collections: their documents look missing, other keys see nothing', async () => {
    const cross = await app.inject({ url: `/v1/collections/beta/documents/${docId}/passage?start=0&end=5`, headers: auth(BETA_KEY) });
    expect(cross.json().error.code).toBe('SB_ERR_UNKNOWN_DOCUMENT');
    const otherKey = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/passage?start=0&end=5`, headers: auth(BETA_KEY) });
    expect(otherKey.statusCode).toBe(404);
    expect(otherKey.json().error.code).toBe('SB_ERR_UNKNOWN_COLLECTION');
    const noKey = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/passage?start=0&end=5` });
    expect(noKey.statusCode).toBe(401);
  });
});

describe('original files', () => {
  it('serves the stored file with the key, sandboxed unless it is a PDF', async () => {
    const res = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/original`, headers: auth(ALPHA_KEY) });
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toBe('text/plain; charset=utf-8');
    expect(res.headers['content-security-policy']).toContain('sandbox');
    expect(res.headers['cache-control']).toBe('private, no-store');
    expect(res.body).toBe(await import('node:fs').then((fs) => fs.readFileSync(path.join(folder, 'lost-property.txt'), 'utf8')));
    const other = await app.inject({ url: `/v1/collections/alpha/documents/${docId}/original`, headers: auth(BETA_KEY) });
    expect(other.statusCode).toBe(404);
  });

  it('opens through a signed link that names one document and expires', async () => {
    const made = await app.inject({ method: 'POST', url: `/v1/collections/alpha/documents/${docId}/original-link`, headers: auth(ALPHA_KEY) });
    expect(made.statusCode).toBe(200);
    const { path: link } = made.json() as { path: string };
    expect(link).toMatch(/^\/originals\?link=/);
    expect((await app.inject({ url: link })).statusCode).toBe(200);
    const tampered = link.replace(/link=(.)/, (_m, c: string) => `link=${c === 'e' ? 'f' : 'e'}`);
    expect((await app.inject({ url: tampered })).json().error.code).toBe('SB_ERR_LINK_INVALID');
    expect((await app.inject({ url: '/originals' })).statusCode).toBe(403);

    let clock = 1_000_000;
    const desk = createDeskService({ repo: rt.repo, ratings: rt.store.ratings, now: () => clock });
    const token = desk.linkOriginal('alpha', docId).path.split('link=')[1]!;
    expect(desk.redeemLink(token)).toEqual({ collection: 'alpha', documentId: docId });
    clock += LINK_TTL_MS + 1;
    expect(() => desk.redeemLink(token)).toThrow(expect.objectContaining({ code: 'SB_ERR_LINK_INVALID' }));
    // A link made by another process (another secret) is refused.
    expect(() => createDeskService({ repo: rt.repo, ratings: rt.store.ratings }).redeemLink(token)).toThrow(expect.objectContaining({ code: 'SB_ERR_LINK_INVALID' }));
  });

  it('refuses every one-character change to a link, at either end or in the middle, spellings that decode to the same bytes included', () => {
    const desk = createDeskService({ repo: rt.repo, ratings: rt.store.ratings });
    const token = desk.linkOriginal('alpha', docId).path.split('link=')[1]!;
    const [payload, signature] = token.split('.') as [string, string];
    const ALPHABET = 'ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789-_';
    const accepted: string[] = [];
    let tried = 0;
    const attempt = (forged: string) => {
      tried++;
      try {
        desk.redeemLink(forged);
        accepted.push(forged);
      } catch (err) {
        expect((err as { code?: string }).code).toBe('SB_ERR_LINK_INVALID');
      }
    };
    for (let i = 0; i < signature.length; i++) {
      for (const c of ALPHABET) if (c !== signature[i]) attempt(`${payload}.${signature.slice(0, i)}${c}${signature.slice(i + 1)}`);
    }
    for (let i = 0; i < payload.length; i++) {
      for (const c of ALPHABET) if (c !== payload[i]) attempt(`${payload.slice(0, i)}${c}${payload.slice(i + 1)}.${signature}`);
    }
    expect(accepted).toEqual([]);
    expect(tried).toBe((signature.length + payload.length) * 63);
    // The case that made the old check flaky: three other final characters decode to the very same MAC.
    const same = [...ALPHABET].filter((c) => c !== signature.at(-1) && Buffer.from(signature.slice(0, -1) + c, 'base64url').equals(Buffer.from(signature, 'base64url')));
    expect(same).toHaveLength(3);
    expect(desk.redeemLink(token)).toEqual({ collection: 'alpha', documentId: docId });
  });

  it('refuses a link with a character changed in the middle of its signature over HTTP', async () => {
    const made = await app.inject({ method: 'POST', url: `/v1/collections/alpha/documents/${docId}/original-link`, headers: auth(ALPHA_KEY) });
    const link = (made.json() as { path: string }).path;
    const at = link.indexOf('.') + 20;
    const forged = `${link.slice(0, at)}${link[at] === 'A' ? 'B' : 'A'}${link.slice(at + 1)}`;
    const res = await app.inject({ url: forged });
    expect(res.statusCode).toBe(403);
    expect(res.json().error.code).toBe('SB_ERR_LINK_INVALID');
    expect((await app.inject({ url: link })).statusCode).toBe(200);
  });

  it('refuses a file changed since it was indexed, and one that is gone', async () => {
    const id = rt.repo.getDocumentBySource('beta', 'concession-passes.md')!.id;
    appendFileSync(path.join(folder, 'concession-passes.md'), '\nAn added line.\n');
    const changed = await app.inject({ url: `/v1/collections/beta/documents/${id}/original`, headers: auth(BETA_KEY) });
    expect(changed.statusCode).toBe(409);
    expect(changed.json().error.code).toBe('SB_ERR_ORIGINAL_CHANGED');
    rmSync(path.join(folder, 'concession-passes.md'));
    const gone = await app.inject({ url: `/v1/collections/beta/documents/${id}/original`, headers: auth(BETA_KEY) });
    expect(gone.statusCode).toBe(404);
    expect(gone.json().error.code).toBe('SB_ERR_ORIGINAL_UNAVAILABLE');
  });

  it('never follows a link out of the source folder', async () => {
    const id = rt.repo.getDocumentBySource('beta', 'bikes-on-board.html')!.id;
    const outside = mkdtempSync(path.join(tmpdir(), 'sb-outside-'));
    const real = path.join(folder, 'bikes-on-board.html');
    cpSync(real, path.join(outside, 'bikes-on-board.html'));
    rmSync(real);
    symlinkSync(path.join(outside, 'bikes-on-board.html'), real);
    try {
      const res = await app.inject({ url: `/v1/collections/beta/documents/${id}/original`, headers: auth(BETA_KEY) });
      expect(res.statusCode).toBe(404);
      expect(res.json().error.code).toBe('SB_ERR_ORIGINAL_UNAVAILABLE');
    } finally {
      rmSync(outside, { recursive: true, force: true });
    }
  });
});

describe('POST /v1/ratings', () => {
  const rating = {
    collection: 'alpha',
    question: 'How long are found items kept?',
    answer: 'Found items are kept for 30 days [1].',
    abstained: false,
    sources: [{ n: 1, documentId: 'x', source: 'lost-property.txt', title: 'Lost Property', page: null, section: 'Lost Property', quote: 'kept for 30 days', start: 1, end: 2 }],
    helpful: true,
    comment: 'Right.',
  };

  it('stores the rating with the key id', async () => {
    const res = await app.inject({ method: 'POST', url: '/v1/ratings', headers: auth(ALPHA_KEY), payload: rating });
    expect(res.statusCode).toBe(201);
    const stored = createDeskService({ repo: rt.repo, ratings: rt.store.ratings }).ratings.list({ collection: 'alpha' });
    const last = stored[stored.length - 1]!;
    expect(last).toMatchObject({ keyId: 'alpha-staff', question: rating.question, helpful: true, comment: 'Right.', abstained: false });
    expect(last.sources).toEqual([{ n: 1, documentId: 'x', source: 'lost-property.txt', title: 'Lost Property', page: null, section: 'Lost Property', quote: 'kept for 30 days' }]);
  });

  it('refuses a rating for a collection the key may not use, and a malformed one', async () => {
    const res = await app.inject({ method: 'POST', url: '/v1/ratings', headers: auth(BETA_KEY), payload: rating });
    expect(res.json().error.code).toBe('SB_ERR_UNKNOWN_COLLECTION');
    const bad = await app.inject({ method: 'POST', url: '/v1/ratings', headers: auth(ALPHA_KEY), payload: { ...rating, helpful: 'yes' } });
    expect(bad.statusCode).toBe(400);
    expect(bad.json().error.code).toBe('SB_ERR_VALIDATION');
    const long = await app.inject({ method: 'POST', url: '/v1/ratings', headers: auth(ALPHA_KEY), payload: { ...rating, comment: 'x'.repeat(2001) } });
    expect(long.statusCode).toBe(400);
  });
});

describe('the desk page', () => {
  it('is served without a key, with a strict CSP and revalidation by ETag', async () => {
    const res = await app.inject({ url: '/' });
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-security-policy']).toBe(DESK_CSP);
    expect(res.headers['cache-control']).toBe('no-cache');
    const again = await app.inject({ url: '/', headers: { 'if-none-match': String(res.headers.etag) } });
    expect(again.statusCode).toBe(304);
    expect((await app.inject({ url: '/desk/desk.js' })).headers['content-type']).toBe('text/javascript; charset=utf-8');
  });

  it('serves only the files of its folder, by exact name', async () => {
    for (const url of ['/desk/..%2Fpackage.json', '/desk/missing.js', '/desk/%2e%2e%2fconfig.json']) {
      expect((await app.inject({ url })).statusCode, url).toBe(404);
    }
  });
});
