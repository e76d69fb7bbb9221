import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { routeTable, type RouteAccess, type RouteRecord } from '../../src/api/access.js';
import { buildApp, type AppDeps } from '../../src/api/app.js';
import { sha256Hex, type Scope } from '../../src/api/auth.js';
import type { Config } from '../../src/config/index.js';
import type { JobQueue } from '../../src/jobs/index.js';
import { appDeps, createDocumentApi, type Runtime } from '../../src/runtime.js';
import { tempRuntime, rawDb } from '../fixtures/runtime.js';

// Access is decided on the route the router matched. These tests walk the app's own route table, so a
// route added later is probed without editing this file: every route, spelled many ways, by callers
// who may not use it, must be refused (never a 2xx it does not entitle, never a 5xx).

const KEYS = {
  full: 'sbk_full-every-scope-every-collection',
  homeAdmin: 'sbk_home-admin-every-scope',
  pairAdmin: 'sbk_pair-admin-two-collections',
  queryAll: 'sbk_query-only-every-collection',
  ingestAll: 'sbk_ingest-only-every-collection',
  adminAll: 'sbk_admin-only-every-collection',
  homeIngest: 'sbk_home-ingest-only',
  legacy: 'sb_made-before-the-prefix-changed',
};
const WRONG = 'sbk_not-a-key-anyone-was-given';
const ALL: Scope[] = ['query', 'ingest', 'admin'];
const keyConfig = [
  { id: 'full', sha256: sha256Hex(KEYS.full), scopes: ALL, collections: ['*'] },
  { id: 'home-admin', sha256: sha256Hex(KEYS.homeAdmin), scopes: ALL, collections: ['home'] },
  { id: 'pair-admin', sha256: sha256Hex(KEYS.pairAdmin), scopes: ['admin'], collections: ['home', 'spare'] },
  { id: 'query-all', sha256: sha256Hex(KEYS.queryAll), scopes: ['query'], collections: ['*'] },
  { id: 'ingest-all', sha256: sha256Hex(KEYS.ingestAll), scopes: ['ingest'], collections: ['*'] },
  { id: 'admin-all', sha256: sha256Hex(KEYS.adminAll), scopes: ['admin'], collections: ['*'] },
  { id: 'home-ingest', sha256: sha256Hex(KEYS.homeIngest), scopes: ['ingest'], collections: ['home'] },
  { id: 'legacy', sha256: sha256Hex(KEYS.legacy), scopes: ['query'], collections: ['home'] },
];
// Single-scope keys holding every collection: for a route, one whose scope the route does not accept.
const SCOPE_KEYS: Record<Scope, string> = { query: KEYS.queryAll, ingest: KEYS.ingestAll, admin: KEYS.adminAll };

// What only the "vault" collection holds: none of it may reach a caller who may not read the vault.
const SECRET_WORD = 'zephyrine';
const VAULT_SOURCE = 'pay-scales.md';

let rt: Runtime;
let config: Readonly<Config>;
let deps: AppDeps;
let app: FastifyInstance;
let queue: JobQueue;
let cleanup: () => void;
let folder: string;
let deskDir: string;
let vaultDoc = '';
let vaultJob = '';
let allJob = '';
let port = 0;
const agent = new http.Agent({ keepAlive: true, maxSockets: 1 });

const bearer = (key: string | null): Record<string, string> => (key ? { authorization: `Bearer ${key}` } : {});
const jobCount = (where = '1 = 1', ...args: unknown[]): number =>
  (rawDb(rt).prepare(`SELECT count(*) AS n FROM jobs WHERE ${where}`).get(...args) as { n: number }).n;

beforeAll(async () => {
  folder = mkdtempSync(path.join(tmpdir(), 'sb-access-'));
  mkdirSync(path.join(folder, 'home'));
  mkdirSync(path.join(folder, 'vault'));
  writeFileSync(path.join(folder, 'home', 'lost-property.md'), '# Lost property\n\nFound items are kept for 30 days at the depot office.\n');
  writeFileSync(path.join(folder, 'home', 'bikes.md'), '# Bikes on board\n\nFolded bikes may travel at any time; others outside peak hours.\n');
  writeFileSync(path.join(folder, 'vault', VAULT_SOURCE), `# Confidential pay scales\n\nGrade T3 drivers earn the ${SECRET_WORD} supplement.\n`);
  deskDir = mkdtempSync(path.join(tmpdir(), 'sb-access-web-'));
  writeFileSync(path.join(deskDir, 'index.html'), '<!doctype html><title>desk</title>');
  writeFileSync(path.join(deskDir, 'desk.js'), 'export {};');

  const made = await tempRuntime({ auth: { required: true, keys: keyConfig }, limits: { rateLimitPerMinute: 1_000_000 } });
  ({ rt, config, cleanup } = made);
  const api = createDocumentApi(rt, 'inline');
  queue = api.queue;
  deps = { ...appDeps(rt, () => true, api.documents), deskAssetsDir: deskDir };
  app = buildApp(config, deps);
  // Listening too: inject() parses its URL as a WHATWG URL, which resolves dot segments, so paths with
  // them go over a real socket exactly as written.
  await app.listen({ host: '127.0.0.1', port: 0 });
  port = (app.server.address() as AddressInfo).port;
  await rt.ingestor.ingestPath(path.join(folder, 'home'), { collection: 'home' });
  await rt.ingestor.ingestPath(path.join(folder, 'vault'), { collection: 'vault' });
  vaultDoc = rt.repo.getDocumentBySource('vault', VAULT_SOURCE)!.id;

  // A job of the vault, and one that spans every collection.
  const upload = await app.inject({
    method: 'POST',
    url: '/v1/collections/vault/documents',
    headers: bearer(KEYS.full),
    payload: { name: 'pay-notes.md', text: `# Pay notes\n\nThe ${SECRET_WORD} supplement is reviewed in May.\n` },
  });
  expect(upload.statusCode, upload.body).toBe(202);
  vaultJob = upload.json().jobId;
  const all = await app.inject({ method: 'POST', url: '/v1/reindex', headers: bearer(KEYS.full), payload: {} });
  expect(all.statusCode, all.body).toBe(202);
  allJob = all.json().jobId;
  await queue.idle();
});

afterAll(async () => {
  agent.destroy();
  await app?.close();
  await queue?.close();
  cleanup?.();
  rmSync(folder, { recursive: true, force: true });
  rmSync(deskDir, { recursive: true, force: true });
});

// ---- the route table and the ways to spell a path ----

/** The path of a route with its parameters filled: the vault's collection, document and job. */
function fill(url: string, values: Record<string, string>): string {
  // A parameter this file does not know still gets a value, so a new route is probed all the same.
  return url.replace(/:([A-Za-z0-9_]+)/g, (_m, name: string) => values[name] ?? 'x');
}

const pct = (c: string, upper = false): string => {
  const hex = c.charCodeAt(0).toString(16).padStart(2, '0');
  return `%${upper ? hex.toUpperCase() : hex}`;
};

/** Ways to write the same path that a router or a proxy might read as it, or as something else. */
export function spellings(p: string): string[] {
  const segs = p.split('/').slice(1);
  const first = segs[0] ?? '';
  const rest = p.slice(first.length + 1);
  const out = new Set<string>([p]);
  const encodeFirst = (re: RegExp, upper: boolean): string => {
    const i = p.search(re);
    return i < 0 ? p : `${p.slice(0, i)}${pct(p[i]!, upper)}${p.slice(i + 1)}`;
  };
  out.add(encodeFirst(/[a-z]/, false)); // a letter, lower-case hex (/%761/...)
  out.add(encodeFirst(/[a-z]/, true)); // a letter, upper-case hex
  out.add(encodeFirst(/[0-9]/, false)); // a digit (/v%31/...)
  out.add(p.replace(/[^/]/g, (c) => pct(c))); // every character but the slashes
  if (segs.length > 1) out.add(`/${first}/${segs.slice(1).map((s) => s.replace(/[a-z]/, (c) => pct(c, true))).join('/')}`); // a letter in every later segment
  out.add(`/${p}`); // doubled slash in front
  if (segs.length > 1) out.add(`/${first}/${rest}`); // doubled slash inside
  out.add(`${p}/`); // trailing slash
  out.add(`/.${p}`); // dot segment
  out.add(`/x/..${p}`); // parent segment
  out.add(`/%2e${p}`); // encoded dot segment
  out.add(`/x/%2e%2e${p}`); // encoded parent segment
  out.add(p.toUpperCase()); // upper case
  if (first) out.add(`/${first.toUpperCase()}${rest}`); // upper-case first segment
  out.add(`${p};x=1`); // matrix parameter at the end
  if (first) out.add(`/${first};x=1${rest}`); // matrix parameter on the first segment
  if (segs.length > 1) out.add(`/${first}${rest.replace(/\//g, '%2F')}`); // encoded slashes
  out.add(`${p}?x=1`); // a query string
  return [...out];
}

interface Caller {
  name: string;
  key: string | null;
}

/**
 * The callers to try on a route: no key, a wrong key, a key for another collection, and a key without
 * the route's scope (when some scope is not accepted). A keyed route must refuse them all.
 */
function callersFor(access: RouteAccess): Caller[] {
  const callers: Caller[] = [
    { name: 'no key', key: null },
    { name: 'wrong key', key: WRONG },
    { name: 'key for another collection', key: KEYS.homeAdmin },
  ];
  const without = access.kind === 'key' ? ALL.find((s) => !access.scopes.includes(s)) : undefined;
  if (without) callers.push({ name: `key with only ${without}`, key: SCOPE_KEYS[without] });
  return callers;
}

interface Reply {
  statusCode: number;
  body: string;
}

/** A path with a dot segment, literal or percent-encoded, which a URL parser would resolve away. */
const hasDotSegment = (url: string): boolean => /\/(\.|%2e){1,2}(\/|$|\?)/i.test(url);

function raw(method: string, url: string, headers: Record<string, string>, payload?: string): Promise<Reply> {
  return new Promise((resolve, reject) => {
    const req = http.request({ host: '127.0.0.1', port, method, path: url, agent, headers: { ...headers, ...(payload ? { 'content-type': 'application/json', 'content-length': String(Buffer.byteLength(payload)) } : {}) } }, (res) => {
      let body = '';
      res.setEncoding('utf8');
      res.on('data', (d: string) => (body += d));
      res.on('end', () => resolve({ statusCode: res.statusCode ?? 0, body }));
    });
    req.on('error', reject);
    req.end(payload);
  });
}

async function request(route: RouteRecord, url: string, key: string | null, body: Record<string, unknown>): Promise<Reply> {
  const sendsBody = !['GET', 'HEAD', 'DELETE'].includes(route.method);
  if (hasDotSegment(url)) return raw(route.method, url, bearer(key), sendsBody ? JSON.stringify(body) : undefined);
  const res = await app.inject({ method: route.method as 'GET', url, headers: bearer(key), ...(sendsBody ? { payload: body } : {}) });
  return { statusCode: res.statusCode, body: res.body };
}

const errorCode = (res: Reply): string | null => {
  try {
    return (JSON.parse(res.body) as { error?: { code?: string } }).error?.code ?? null;
  } catch {
    return null;
  }
};

describe('the route table', () => {
  it('holds every route of the app, each with an access declaration', () => {
    const routes = routeTable(app);
    const names = routes.map((r) => `${r.method} ${r.url}`);
    for (const expected of ['GET /health', 'GET /ready', 'GET /metrics', 'POST /v1/search', 'POST /v1/answer', 'DELETE /v1/collections/:collection/documents/:id', 'POST /v1/reindex', 'GET /v1/jobs/:jobId', 'GET /originals', 'GET /desk/:file', 'HEAD /v1/collections']) {
      expect(names).toContain(expected);
    }
    expect(routes.filter((r) => !r.access).map((r) => `${r.method} ${r.url}`)).toEqual([]);
  });

  it('keeps the public routes to the short list: the desk page and its assets, /health and /ready', () => {
    const open = routeTable(app).filter((r) => r.access?.kind !== 'key');
    expect(open.map((r) => `${r.method} ${r.url} ${r.access!.kind}`).sort()).toEqual(
      [
        'GET / public', 'HEAD / public', 'GET /desk/:file public', 'HEAD /desk/:file public', 'GET /health public', 'HEAD /health public',
        'GET /ready public', 'HEAD /ready public', 'GET /originals signed-link', 'HEAD /originals signed-link',
      ].sort(),
    );
  });

  it('refuses every route, however its path is spelled, to callers it does not entitle, and never fails with a 5xx', async () => {
    const values = { collection: 'vault', id: vaultDoc, jobId: vaultJob, file: 'desk.js' };
    const vaultDocs = rt.repo.listDocuments('vault').length;
    const jobsBefore = jobCount();
    const failures: string[] = [];
    let requests = 0;
    let overSocket = 0;
    const statuses = new Map<number, number>();
    const spellingCounts: number[] = [];
    for (const route of routeTable(app)) {
      const access = route.access!;
      const body = access.kind === 'key' && access.collection.in === 'body' ? { collection: 'vault' } : {};
      const urls = spellings(fill(route.url, values));
      spellingCounts.push(urls.length);
      for (const url of urls) {
        for (const caller of callersFor(access)) {
          const res = await request(route, url, caller.key, body);
          requests++;
          if (hasDotSegment(url)) overSocket++;
          statuses.set(res.statusCode, (statuses.get(res.statusCode) ?? 0) + 1);
          const what = `${route.method} ${url} with ${caller.name} -> ${res.statusCode} ${res.body.slice(0, 120)}`;
          if (res.statusCode >= 500) failures.push(`5xx: ${what}`);
          if (res.body.includes(SECRET_WORD) || res.body.includes(VAULT_SOURCE)) failures.push(`leaked the vault: ${what}`);
          // The public routes hold no data: any caller may read them.
          if (access.kind === 'public') continue;
          const ok = res.statusCode >= 200 && res.statusCode < 300;
          // Only a route that narrows itself to the key's own collections may answer the other collection's
          // key, and then with nothing of the vault in it. A signed-link route without its link answers no one.
          const entitled = access.kind === 'key' && caller.key === KEYS.homeAdmin && access.collection.in === 'own';
          if (ok && !entitled) failures.push(`2xx: ${what}`);
          if (ok && (res.body.includes(vaultDoc) || res.body.includes('vault'))) failures.push(`named the vault: ${what}`);
          // 405: the spelling reached a path served for other methods (a trailing slash on a collection's
          // documents reaches the `:id` path); a refusal that shows nothing, and never to a key for another collection.
          const wrongMethod = res.statusCode === 405 && caller.key !== KEYS.homeAdmin && caller.key !== null && caller.key !== WRONG;
          if (!ok && ![401, 403, 404].includes(res.statusCode) && !wrongMethod) failures.push(`unexpected status: ${what}`);
        }
      }
    }
    expect(failures).toEqual([]);
    // The requests were refused, not merely failed: nothing was deleted, queued or re-indexed.
    expect(rt.repo.listDocuments('vault').length).toBe(vaultDocs);
    expect(jobCount()).toBe(jobsBefore);
    expect(spellingCounts.length).toBeGreaterThanOrEqual(30);
    // Fewer for one-segment paths (no inner segment, no digit) and fewest for "/", where spellings coincide.
    expect(Math.min(...spellingCounts)).toBeGreaterThanOrEqual(8);
    expect(Math.max(...spellingCounts)).toBeGreaterThanOrEqual(18);
    expect(overSocket).toBeGreaterThan(0);
    console.info(
      `route-table probe: ${spellingCounts.length} routes x ${Math.min(...spellingCounts)}-${Math.max(...spellingCounts)} spellings x 3-4 callers = ` +
        `${requests} requests (${overSocket} over a socket); statuses ${JSON.stringify(Object.fromEntries(statuses))}`,
    );
  });

  it('lets the entitled key through on every route it probes (so the refusals above are the access rule at work)', async () => {
    // Real ids for reads; a missing document for DELETE; bodies with an unknown field, which every body
    // schema refuses, so no search, upload, rating or re-index runs.
    const failures: string[] = [];
    for (const route of routeTable(app)) {
      const access = route.access!;
      const values = { collection: 'vault', id: route.method === 'DELETE' ? 'no-such-document' : vaultDoc, jobId: vaultJob, file: 'desk.js' };
      const body = { ...(access.kind === 'key' && access.collection.in === 'body' ? { collection: 'vault' } : {}), probe: true };
      const res = await request(route, fill(route.url, values), KEYS.full, body);
      const what = `${route.method} ${route.url} -> ${res.statusCode} ${res.body.slice(0, 120)}`;
      if (res.statusCode >= 500 || [401, 429].includes(res.statusCode)) failures.push(what);
      if (access.kind === 'key' && res.statusCode === 403) failures.push(what);
      if (res.statusCode === 404 && (route.method === 'HEAD' || errorCode(res) === 'SB_ERR_NOT_FOUND') && route.method !== 'DELETE') failures.push(what);
    }
    expect(failures).toEqual([]);
  });

  it('refuses a route that declares no access rule, whoever calls it', async () => {
    const other = buildApp(config, deps);
    let ran = false;
    other.get('/v1/undeclared', async () => {
      ran = true;
      return { secret: SECRET_WORD };
    });
    await other.ready();
    try {
      expect(routeTable(other).find((r) => r.url === '/v1/undeclared')).toMatchObject({ method: 'GET', access: undefined });
      for (const key of [null, KEYS.full, WRONG]) {
        const res = await other.inject({ url: '/v1/undeclared', headers: bearer(key) });
        expect(res.statusCode).toBe(403);
        expect(res.json().error.code).toBe('SB_ERR_FORBIDDEN');
      }
      expect(ran).toBe(false);
    } finally {
      await other.close();
    }
  });

  it('answers an unknown route with the same 404 whoever asks, naming nothing but the path asked for', async () => {
    const bodies = new Set<string>();
    for (const key of [null, WRONG, KEYS.homeAdmin, KEYS.full]) {
      const res = await app.inject({ url: '/v1/collections/vault/secrets', headers: bearer(key) });
      expect(res.statusCode).toBe(404);
      bodies.add(res.body);
    }
    expect([...bodies]).toEqual([JSON.stringify({ error: { code: 'SB_ERR_NOT_FOUND', message: 'No route GET /v1/collections/vault/secrets', details: null } })]);
  });
});

describe('the probe from the issue, without a key', () => {
  it('answers every differently spelled path 401, 403 or 404, and changes nothing', async () => {
    const jobsBefore = jobCount();
    const probes = [
      { method: 'GET', url: '/v%31/collections' },
      { method: 'GET', url: '/%6detrics' },
      { method: 'POST', url: '/%761/search', payload: { query: 'pay supplement', collection: 'vault' } },
      { method: 'DELETE', url: `/%761/collections/vault/documents/${vaultDoc}` },
      { method: 'POST', url: '/%761/reindex', payload: {} },
    ] as const;
    for (const p of probes) {
      const res = await app.inject({ method: p.method, url: p.url, ...('payload' in p ? { payload: p.payload } : {}) });
      expect([401, 403, 404], `${p.method} ${p.url} -> ${res.statusCode}`).toContain(res.statusCode);
      expect(res.body).not.toContain(SECRET_WORD);
    }
    expect(rt.repo.getDocument(vaultDoc)).not.toBeNull();
    expect(jobCount()).toBe(jobsBefore);
  });
});

describe('a key limited to one collection, with every scope', () => {
  it('re-indexes only its own collection when it names none, and gets 404 for another', async () => {
    const res = await app.inject({ method: 'POST', url: '/v1/reindex', headers: bearer(KEYS.homeAdmin), payload: {} });
    expect(res.statusCode).toBe(202);
    await queue.idle();
    const job = (await app.inject({ url: `/v1/jobs/${res.json().jobId}`, headers: bearer(KEYS.homeAdmin) })).json();
    expect(job.collection).toBe('home');
    expect(job.state).toBe('succeeded');
    // Only the two documents of "home" were looked at.
    expect(job.result.documents.unchanged + job.result.documents.updated + job.result.documents.added).toBe(2);
    const other = await app.inject({ method: 'POST', url: '/v1/reindex', headers: bearer(KEYS.homeAdmin), payload: { collection: 'vault' } });
    const missing = await app.inject({ method: 'POST', url: '/v1/reindex', headers: bearer(KEYS.homeAdmin), payload: { collection: 'nowhere' } });
    expect(other.statusCode).toBe(404);
    expect(other.json().error.code).toBe(missing.json().error.code);
  });

  it('must name the collection to re-index when it holds several', async () => {
    const before = jobCount();
    const res = await app.inject({ method: 'POST', url: '/v1/reindex', headers: bearer(KEYS.pairAdmin), payload: {} });
    expect(res.statusCode).toBe(400);
    expect(res.json().error.message).toContain('home, spare');
    expect(jobCount()).toBe(before);
  });

  it("sees only its own collection's counts in /metrics; a key holding every collection sees all", async () => {
    const scoped = await app.inject({ url: '/metrics', headers: bearer(KEYS.homeAdmin) });
    expect(scoped.statusCode).toBe(200);
    expect(scoped.body).toMatch(/^sourcebound_index_documents\{collection="home"\} 2$/m);
    expect(scoped.body).not.toContain('vault');
    // Job counts too: only the jobs of "home" (the all-collections re-index and the vault upload are left out).
    const homeSucceeded = jobCount("collection = 'home' AND state = 'succeeded'");
    expect(scoped.body).toMatch(new RegExp(`^sourcebound_jobs\\{state="succeeded"\\} ${homeSucceeded}$`, 'm'));
    const all = await app.inject({ url: '/metrics', headers: bearer(KEYS.full) });
    expect(all.body).toMatch(/^sourcebound_index_documents\{collection="vault"\} 2$/m);
    expect(all.body).toMatch(new RegExp(`^sourcebound_jobs\\{state="succeeded"\\} ${jobCount("state = 'succeeded'")}$`, 'm'));
  });

  it("cannot read another collection's job, nor one that spans every collection, which look like missing jobs", async () => {
    const missing = await app.inject({ url: '/v1/jobs/no-such-job', headers: bearer(KEYS.homeAdmin) });
    for (const id of [vaultJob, allJob]) {
      const res = await app.inject({ url: `/v1/jobs/${id}`, headers: bearer(KEYS.homeAdmin) });
      expect(res.statusCode).toBe(404);
      expect(res.json().error.code).toBe(missing.json().error.code);
      expect(res.json().error.message.replace(id, 'ID')).toBe(missing.json().error.message.replace('no-such-job', 'ID'));
    }
    expect((await app.inject({ url: `/v1/jobs/${allJob}`, headers: bearer(KEYS.full) })).statusCode).toBe(200);
  });

  it('lists only its own collection', async () => {
    const res = await app.inject({ url: '/v1/collections', headers: bearer(KEYS.homeAdmin) });
    expect(res.json().collections.map((c: { name: string }) => c.name)).toEqual(['home']);
  });
});

describe('jobs', () => {
  it('an ingest key reads the job of its own upload', async () => {
    const res = await app.inject({
      method: 'POST',
      url: '/v1/collections/home/documents',
      headers: bearer(KEYS.homeIngest),
      payload: { name: 'night-buses.md', text: '# Night buses\n\nNight buses run every 30 minutes.\n' },
    });
    expect(res.statusCode).toBe(202);
    await queue.idle();
    const job = await app.inject({ url: `/v1/jobs/${res.json().jobId}`, headers: bearer(KEYS.homeIngest) });
    expect(job.statusCode).toBe(200);
    expect(job.json()).toMatchObject({ kind: 'upload', collection: 'home', state: 'succeeded' });
  });

  it('an admin key reads jobs, including one that spans every collection', async () => {
    for (const id of [vaultJob, allJob]) {
      const res = await app.inject({ url: `/v1/jobs/${id}`, headers: bearer(KEYS.adminAll) });
      expect(res.statusCode).toBe(200);
    }
  });
});

describe('key formats', () => {
  it('still accepts a key made with the old prefix, recognised by its hash', async () => {
    const res = await app.inject({ url: '/v1/collections', headers: bearer(KEYS.legacy) });
    expect(res.statusCode).toBe(200);
    expect(res.json().collections.map((c: { name: string }) => c.name)).toEqual(['home']);
  });
});
