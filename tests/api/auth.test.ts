import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { checkAuthConfig, createAuthenticator, isLegacyKey, isLoopback, KEY_PREFIX, newApiKey, sha256Hex } from '../../src/api/auth.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';

const KEYS = { reader: 'sbk_reader_key_default_only', admin: 'sbk_admin_key_everything', ingester: 'sbk_ingest_only_key' };
const keyConfig = [
  { id: 'reader', sha256: sha256Hex(KEYS.reader), scopes: ['query'], collections: ['default'] },
  { id: 'admin', sha256: sha256Hex(KEYS.admin), scopes: ['query', 'ingest', 'admin'], collections: ['*'] },
  { id: 'ingester', sha256: sha256Hex(KEYS.ingester), scopes: ['ingest'], collections: ['default'] },
];

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;
let privateDir: string;

beforeAll(async () => {
  const made = await tempRuntime({ auth: { required: true, keys: keyConfig } }, {});
  rt = made.rt;
  cleanup = made.cleanup;
  app = buildApp(made.config, appDeps(rt, () => true));
  await rt.ingestor.ingestPath(SEED_DIR, { collection: 'default' });
  privateDir = mkdtempSync(path.join(tmpdir(), 'sb-private-'));
  writeFileSync(
    path.join(privateDir, 'pay-scales.md'),
    '# Confidential pay scales\n\nTram drivers on grade T3 earn a confidential supplement called the zephyrine allowance.\n',
  );
  await rt.ingestor.ingestPath(privateDir, { collection: 'private' });
});

afterAll(async () => {
  await app.close();
  cleanup();
  rmSync(privateDir, { recursive: true, force: true });
});

const call = (method: 'GET' | 'POST', url: string, key: string | null, payload?: unknown) =>
  app.inject({
    method,
    url,
    headers: { ...(key ? { authorization: `Bearer ${key}` } : {}), ...(payload ? { 'content-type': 'application/json' } : {}) },
    ...(payload ? { payload: JSON.stringify(payload) } : {}),
  });

describe('API keys', () => {
  it('refuses requests without a key with 401 and a WWW-Authenticate header', async () => {
    const res = await call('POST', '/v1/search', null, { query: 'refund' });
    expect(res.statusCode).toBe(401);
    expect(res.headers['www-authenticate']).toBe('Bearer');
    expect(res.json().error.code).toBe('SB_ERR_UNAUTHORIZED');
  });

  it('refuses a wrong key, a malformed header and a key that differs in one character', async () => {
    for (const header of ['Bearer nope', 'Basic abc', 'Bearer', `Bearer ${KEYS.reader.slice(0, -1)}x`]) {
      const res = await app.inject({ method: 'POST', url: '/v1/search', headers: { authorization: header, 'content-type': 'application/json' }, payload: '{"query":"refund"}' });
      expect(res.statusCode, header).toBe(401);
    }
  });

  it('lets a query key search and answer in its collection', async () => {
    expect((await call('POST', '/v1/search', KEYS.reader, { query: 'refund' })).statusCode).toBe(200);
    expect((await call('POST', '/v1/answer', KEYS.reader, { question: 'How long do I have to claim a delay refund?' })).statusCode).toBe(200);
  });

  it('keeps health and readiness open for load balancers', async () => {
    expect((await call('GET', '/health', null)).statusCode).toBe(200);
    expect((await call('GET', '/ready', null)).statusCode).toBe(200);
  });

  it('refuses an ingest-only key on query routes with 403', async () => {
    const res = await call('POST', '/v1/search', KEYS.ingester, { query: 'refund' });
    expect(res.statusCode).toBe(403);
    expect(res.json().error.code).toBe('SB_ERR_FORBIDDEN');
  });

  it('restricts /metrics to admin keys', async () => {
    expect((await call('GET', '/metrics', KEYS.reader)).statusCode).toBe(403);
    expect((await call('GET', '/metrics', KEYS.admin)).statusCode).toBe(200);
  });
});

describe('a key scoped to one collection never sees another', () => {
  it('gets 404 for the other collection on every query route, exactly as for a collection that does not exist', async () => {
    const other = await call('POST', '/v1/search', KEYS.reader, { query: 'zephyrine', collection: 'private' });
    const missing = await call('POST', '/v1/search', KEYS.reader, { query: 'zephyrine', collection: 'nonexistent' });
    expect(other.statusCode).toBe(404);
    expect(other.json().error.code).toBe(missing.json().error.code);
    expect(other.json().error.message.replace('private', 'X')).toBe(missing.json().error.message.replace('nonexistent', 'X'));
    const answer = await call('POST', '/v1/answer', KEYS.reader, { question: 'What is the zephyrine allowance?', collection: 'private' });
    expect(answer.statusCode).toBe(404);
  });

  it('does not list the other collection', async () => {
    const res = await call('GET', '/v1/collections', KEYS.reader);
    expect(res.json().collections.map((c: { name: string }) => c.name)).toEqual(['default']);
    const all = await call('GET', '/v1/collections', KEYS.admin);
    expect(all.json().collections.map((c: { name: string }) => c.name).sort()).toEqual(['default', 'private']);
  });

  it("never returns the other collection's chunks in search or answers", async () => {
    for (const mode of ['lexical', 'dense', 'hybrid']) {
      const res = await call('POST', '/v1/search', KEYS.reader, { query: 'zephyrine allowance grade T3 pay', mode, k: 50 });
      expect(res.statusCode).toBe(200);
      const body = res.body;
      expect(body).not.toContain('zephyrine');
      expect(body).not.toContain('pay-scales.md');
    }
    const ans = await call('POST', '/v1/answer', KEYS.reader, { question: 'What is the zephyrine allowance for T3 drivers?' });
    // The question is echoed back; the answer and its citations must not draw on the private document.
    const { answer, citations } = ans.json();
    expect(answer).not.toMatch(/supplement|T3/);
    expect(JSON.stringify(citations)).not.toContain('pay-scales.md');
  });

  it('lets a key with every collection reach the private one', async () => {
    const res = await call('POST', '/v1/search', KEYS.admin, { query: 'zephyrine', collection: 'private' });
    expect(res.json().results[0].source).toBe('pay-scales.md');
  });
});

describe('the key format', () => {
  it("makes keys with the project's own prefix and 256 random bits", () => {
    const a = newApiKey();
    expect(KEY_PREFIX).toBe('sbk_');
    expect(a).toMatch(/^sbk_[A-Za-z0-9_-]{43}$/);
    expect(Buffer.from(a.slice(KEY_PREFIX.length), 'base64url')).toHaveLength(32);
    expect(newApiKey()).not.toBe(a);
    expect(isLegacyKey(a)).toBe(false);
  });

  it('still accepts a key with the old prefix, since the stored hash covers the whole key', () => {
    const old = 'sb_dGhpcy1rZXktd2FzLW1hZGUtYmVmb3JlLXRoZS1jaGFuZ2U';
    const a = createAuthenticator({ required: true, keys: [{ id: 'old', sha256: sha256Hex(old), scopes: ['query'], collections: ['*'] }] }, '127.0.0.1');
    expect(isLegacyKey(old)).toBe(true);
    expect(a.identify(`Bearer ${old}`)).toMatchObject({ kind: 'key', legacyFormat: true, principal: { keyId: 'old' } });
    expect(a.identify(`Bearer sbk_${old.slice(3)}`)).toEqual({ kind: 'wrong' });
  });
});

describe('auth configuration', () => {
  it('treats 127.x, ::1 and localhost as loopback and other addresses as not', () => {
    expect(['127.0.0.1', '127.1.2.3', '::1', 'localhost'].every(isLoopback)).toBe(true);
    expect(['0.0.0.0', '10.0.0.5', '::', 'example.internal'].some(isLoopback)).toBe(false);
  });

  it('refuses to start on a non-loopback address without keys', () => {
    expect(() => checkAuthConfig({ required: false, keys: [] }, '0.0.0.0')).toThrow(/no API keys/);
    expect(() => checkAuthConfig({ required: false, keys: [] }, '127.0.0.1')).not.toThrow();
    expect(() => checkAuthConfig({ required: true, keys: [] }, '127.0.0.1')).toThrow(/auth.required/);
  });

  it('enforces keys on a non-loopback address even when not required in the config', () => {
    const a = createAuthenticator({ required: false, keys: keyConfig as never }, '0.0.0.0');
    expect(a.enforced).toBe(true);
    expect(() => a.authenticate(undefined)).toThrow();
    expect(a.authenticate(`Bearer ${KEYS.reader}`).keyId).toBe('reader');
  });
});
