import { createHash, randomBytes } from 'node:crypto';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CAUTION } from '../../src/answer/caution.js';
import { createTestDatabase, describePg, type TestDatabase } from '../fixtures/pg.js';
import { startServe, type ServeProcess } from '../fixtures/serve.js';
import { waitFor } from '../fixtures/wait.js';
import { startWorker, type WorkerProcess } from '../fixtures/worker.js';

// One suite, parameterised by storage back end: the same HTTP contract (upload, job, search, filters, answer,
// abstention, passage, original link, replacement, deletion) is run against a real `serve` process on the
// embedded back end and against an API node and a worker on PostgreSQL, and the two must rank and cite alike
// (DESIGN.md: ranking comes from the project's own BM25 and HNSW on both).

const FARES = `---
team: fares
---
# Night fares

A night fare costs 3.20 and is valid on every night bus until 05:00.

## Night fare refunds

A night fare refund is paid within 10 working days of a valid claim.
`;

const FARES_CHANGED = `---
team: fares
---
# Night fares

A night fare costs 3.60 from the spring timetable change and is valid on every night bus until 05:30.

## Night fare refunds

A night fare refund is paid within 10 working days of a valid claim.
`;

const LOST = `---
team: stations
---
# Lost property at stations

Items found at stations are kept for 30 days at the central lost property desk.

## Umbrellas and gloves

Umbrellas and single gloves are kept for 7 days only.
`;

const QUERIES = ['night fare refund', 'lost property desk', 'how long are items kept at stations'];

interface Reply {
  status: number;
  body: Record<string, any>;
}

interface Target {
  base: string;
  /** Every process's output, for failure messages. */
  output(): string;
  stop(): Promise<void>;
}

interface Observed {
  rankings: unknown[];
  citations: unknown[];
}

const observed: Record<string, Observed> = {};
const dirs: string[] = [];
const dir = (): string => {
  const d = mkdtempSync(path.join(tmpdir(), 'sb-backends-'));
  dirs.push(d);
  return d;
};
afterAll(() => {
  for (const d of dirs) rmSync(d, { recursive: true, force: true });
});

// Keys as an operator configures them (`sourcebound key new`): one that may upload and query, one that may only query.
const WRITER = `sbk_${randomBytes(24).toString('base64url')}`;
const READER = `sbk_${randomBytes(24).toString('base64url')}`;
const ADMIN = `sbk_${randomBytes(24).toString('base64url')}`;
const keyEntry = (id: string, key: string, scopes: string[]) => ({ id, sha256: createHash('sha256').update(key).digest('hex'), scopes, collections: ['*'] });

function configFile(settings: Record<string, unknown>): string {
  const file = path.join(dir(), 'config.json');
  // No seed documents: both back ends start empty and get the same uploads.
  const auth = { required: true, keys: [keyEntry('writer', WRITER, ['query', 'ingest']), keyEntry('reader', READER, ['query']), keyEntry('admin', ADMIN, ['query', 'ingest', 'admin'])] };
  // A small text limit, so that one upload fails for a reason both back ends must report alike.
  writeFileSync(file, JSON.stringify({ seed: { ingestOnEmpty: false }, auth, limits: { documentMaxChars: 20_000 }, ...settings }));
  return file;
}

async function startSqlite(): Promise<Target> {
  const serve = await startServe({ SOURCEBOUND_CONFIG: configFile({}), SOURCEBOUND_DATA_DIR: dir() });
  return { base: serve.base, output: serve.output, stop: serve.stop };
}

async function startPostgres(): Promise<Target> {
  const db: TestDatabase = await createTestDatabase();
  const env = {
    SOURCEBOUND_CONFIG: configFile({ storage: { backend: 'postgres', followPollMs: 250 } }),
    SOURCEBOUND_DATABASE_URL: db.url,
    SOURCEBOUND_SHARED_DIR: dir(),
  };
  const processes: (ServeProcess | WorkerProcess)[] = [];
  try {
    processes.push(await startWorker({ ...env, SOURCEBOUND_DATA_DIR: dir() }));
    const serve = await startServe({ ...env, SOURCEBOUND_DATA_DIR: dir() });
    processes.push(serve);
    return {
      base: serve.base,
      output: () => processes.map((p) => p.output().slice(-4000)).join('\n---\n'),
      stop: async () => {
        for (const p of processes) await p.stop().catch(() => undefined);
        await db.drop();
      },
    };
  } catch (err) {
    for (const p of processes) await p.stop().catch(() => undefined);
    await db.drop();
    throw err;
  }
}

function contract(backend: string, start: () => Promise<Target>): void {
  let t: Target;
  const ids: Record<string, string> = {};

  const call = async (method: string, route: string, body?: unknown, key: string | null = WRITER): Promise<Reply> => {
    const headers: Record<string, string> = key ? { authorization: `Bearer ${key}` } : {};
    const r = await fetch(`${t.base}${route}`, {
      method,
      ...(body === undefined ? { headers } : { headers: { ...headers, 'content-type': 'application/json' }, body: JSON.stringify(body) }),
    });
    const text = await r.text();
    let parsed: Record<string, any>;
    try {
      parsed = JSON.parse(text) as Record<string, any>;
    } catch {
      parsed = { text };
    }
    return { status: r.status, body: parsed };
  };
  const search = (query: string, extra: Record<string, unknown> = {}) => call('POST', '/v1/search', { query, k: 5, ...extra });
  const sources = (r: Reply): string[] => (r.body.results as { source: string }[]).map((x) => x.source);

  /** Waits for a job to end; its last state. */
  const finished = (jobId: string, what: string) =>
    waitFor(
      async () => {
        const j = await call('GET', `/v1/jobs/${jobId}`);
        return j.body.state === 'succeeded' || j.body.state === 'failed' ? j.body : null;
      },
      { what: `${backend}: ${what} to finish`, timeoutMs: 60_000, intervalMs: 25, detail: () => t.output() },
    );

  /** Uploads a Markdown document and waits for its job to succeed. */
  const upload = async (name: string, text: string): Promise<void> => {
    const up = await call('POST', '/v1/collections/default/documents', { name, text });
    expect(up.status, JSON.stringify(up.body)).toBe(202);
    const job = await finished(up.body.jobId as string, `the upload job of ${name}`);
    expect(job.state, JSON.stringify(job.error)).toBe('succeeded');
  };

  /** Waits until a search for `query` in every mode shows what `holds` expects (a job's changes reach the lexical and the vector index each just after it ends, not at one moment). */
  const searchUntil = (query: string, holds: (found: string[]) => boolean, what: string) =>
    waitFor(
      async () => {
        for (const mode of ['lexical', 'dense', 'hybrid']) {
          const r = await search(query, { mode });
          if (r.status !== 200 || !holds(sources(r))) return null;
        }
        return true;
      },
      { what: `${backend}: ${what}`, timeoutMs: 30_000, intervalMs: 25, detail: () => t.output() },
    );

  beforeAll(async () => {
    t = await start();
  }, 120_000);
  afterAll(async () => {
    await t?.stop();
  });

  it('ingests uploads and lists them with their counts', async () => {
    expect((await call('GET', '/ready')).status).toBe(200);
    await upload('night-fares.md', FARES);
    await upload('lost-property.md', LOST);
    await searchUntil('night fare refund lost property desk', (s) => s.includes('lost-property.md') && s.includes('night-fares.md'), 'both uploads to be searchable');
    const collections = await call('GET', '/v1/collections');
    const def = (collections.body.collections as { name: string; documents: number; chunks: number }[]).find((c) => c.name === 'default');
    expect(def?.documents).toBe(2);
    expect(def?.chunks).toBeGreaterThanOrEqual(2);
    const docs = (await call('GET', '/v1/collections/default/documents')).body.documents as { id: string; source: string; metadata: Record<string, string> }[];
    expect(docs.map((d) => d.source).sort()).toEqual(['lost-property.md', 'night-fares.md']);
    for (const d of docs) ids[d.source] = d.id;
    expect(docs.find((d) => d.source === 'lost-property.md')?.metadata).toEqual({ team: 'stations' });
  }, 120_000);

  it('searches, filters by metadata and by document, and refuses what it cannot match', async () => {
    const rankings: unknown[] = [];
    for (const q of QUERIES) {
      for (const mode of ['lexical', 'dense', 'hybrid']) {
        const r = await search(q, { mode });
        expect(r.status).toBe(200);
        rankings.push((r.body.results as { source: string; section: string; score: number }[]).map((x) => [q, mode, x.source, x.section, x.score.toFixed(9)]));
      }
    }
    (observed[backend] ??= { rankings: [], citations: [] }).rankings = rankings;
    const byMeta = await search('kept for days', { filter: { metadata: { team: 'stations' } } });
    expect(byMeta.status).toBe(200);
    expect(new Set(sources(byMeta))).toEqual(new Set(['lost-property.md']));
    const byId = await search('kept for days', { filter: { documentIds: [ids['night-fares.md']] } });
    expect(new Set(sources(byId))).toEqual(new Set(['night-fares.md']));
    const none = await search('kept for days', { filter: { metadata: { team: 'nobody' } } });
    expect(none.status).toBe(200);
    expect(none.body.results).toEqual([]);
    expect((await call('POST', '/v1/search', { query: 'fare', typo: 1 })).status).toBe(400);
    expect((await call('GET', '/v1/jobs/no-such-job')).body.error?.code).toBe('SB_ERR_UNKNOWN_JOB');
  }, 60_000);

  it('answers with verbatim, followable citations and the caution, and abstains on what the documents do not say', async () => {
    const r = await call('POST', '/v1/answer', { question: 'How long are umbrellas kept?', mode: 'extractive' });
    expect(r.status).toBe(200);
    expect(r.body.abstained).toBe(false);
    expect(r.body.answer).toContain('7 days');
    expect(r.body.caution).toBe(CAUTION);
    const c = r.body.citations[0] as { documentId: string; source: string; section: string; quote: string; start: number; end: number };
    expect(c.source).toBe('lost-property.md');
    expect(LOST).toContain(c.quote);
    observed[backend]!.citations = (r.body.citations as Record<string, unknown>[]).map(({ n, source, section, quote, page, start, end }) => ({ n, source, section, quote, page, start, end }));
    const passage = await call('GET', `/v1/collections/default/documents/${c.documentId}/passage?start=${c.start}&end=${c.end}`);
    expect(passage.status).toBe(200);
    expect(passage.body.quote).toBe(c.quote);
    const link = await call('POST', `/v1/collections/default/documents/${c.documentId}/original-link`);
    expect(link.status).toBe(200);
    // The signed link is the credential: no key is sent.
    const original = await fetch(`${t.base}${link.body.path}`);
    expect(original.status).toBe(200);
    expect(await original.text()).toBe(LOST);
    const off = await call('POST', '/v1/answer', { question: 'What is the boiling point of liquid nitrogen in kelvin?', mode: 'extractive' });
    expect(off.status).toBe(200);
    expect(off.body.abstained).toBe(true);
    expect(off.body.caution).toBe(CAUTION);
  }, 60_000);

  it('streams the same answer as server-sent events, and carries a follow-up\'s subject from its history', async () => {
    const question = { question: 'How long are umbrellas kept?', mode: 'extractive' };
    const plain = await call('POST', '/v1/answer', question);
    const r = await fetch(`${t.base}/v1/answer`, {
      method: 'POST',
      headers: { authorization: `Bearer ${READER}`, 'content-type': 'application/json' },
      body: JSON.stringify({ ...question, stream: true }),
    });
    expect(r.status).toBe(200);
    expect(r.headers.get('content-type')).toContain('text/event-stream');
    // Server-sent events (WHATWG HTML, "Server-sent events"): blocks separated by a blank line, "event:" and "data:" fields.
    const events = (await r.text())
      .split(/\n\n/)
      .map((block) => ({ event: /^event: (.+)$/m.exec(block)?.[1], data: /^data: (.+)$/m.exec(block)?.[1] }))
      .filter((e) => e.event);
    expect(events[0]?.event).toBe('sources');
    const done = events.at(-1)!;
    expect(done.event).toBe('done');
    const final = JSON.parse(done.data!) as Record<string, unknown>;
    expect(final.answer).toBe(plain.body.answer);
    expect(final.citations).toEqual(plain.body.citations);
    expect(events.filter((e) => e.event === 'delta').map((e) => (JSON.parse(e.data!) as { text: string }).text).join('')).toBe(plain.body.answer);
    const follow = await call('POST', '/v1/answer', {
      question: 'And single gloves?',
      mode: 'extractive',
      history: [
        { role: 'user', content: 'How long are umbrellas kept at stations?' },
        { role: 'assistant', content: plain.body.answer },
      ],
    });
    expect(follow.status).toBe(200);
    expect(follow.body.abstained).toBe(false);
    expect((follow.body.citations as { source: string }[])[0]?.source).toBe('lost-property.md');
  }, 60_000);

  it('sets aside an upload over a limit and names the limit, re-indexes without changing a ranking, and keeps a rating', async () => {
    const long = `# Long notice\n\n${'Night buses stop at marked stops only. '.repeat(700)}`;
    const up = await call('POST', '/v1/collections/default/documents', { name: 'long-notice.md', text: long });
    expect(up.status, JSON.stringify(up.body)).toBe(202);
    const failed = await finished(up.body.jobId as string, 'the upload over the limit');
    expect(failed.state).toBe('failed');
    expect(JSON.stringify(failed.error)).toContain('documentMaxChars');
    const listed = await call('GET', '/v1/collections/default/failed-uploads', undefined, ADMIN);
    expect(listed.status, JSON.stringify(listed.body)).toBe(200);
    const entry = (listed.body.failedUploads as { name: string; source: string; jobId: string; reason: string }[]).find((f) => f.jobId === up.body.jobId);
    expect(entry?.source).toBe('long-notice.md');
    expect(entry?.reason).toContain('documentMaxChars');
    expect((await call('GET', '/v1/collections/default/failed-uploads', undefined, WRITER)).status).toBe(403);
    expect((await call('DELETE', `/v1/collections/default/failed-uploads/${entry!.name}`, undefined, ADMIN)).status).toBe(200);
    expect((await call('GET', '/v1/collections/default/failed-uploads', undefined, ADMIN)).body.failedUploads).toEqual([]);

    const before = await search('night fare refund', { mode: 'hybrid' });
    const reindex = await call('POST', '/v1/reindex', { collection: 'default' }, ADMIN);
    expect(reindex.status, JSON.stringify(reindex.body)).toBe(202);
    const done = await finished(reindex.body.jobId as string, 'the re-index');
    expect(done.state, JSON.stringify(done.error)).toBe('succeeded');
    expect((await search('night fare refund', { mode: 'hybrid' })).body.results).toEqual(before.body.results);

    const rated = await call('POST', '/v1/ratings', { question: 'How long are umbrellas kept?', answer: 'Umbrellas and single gloves are kept for 7 days only.', abstained: false, helpful: true }, READER);
    expect(rated.status, JSON.stringify(rated.body)).toBe(201);
    expect(rated.body.id).toBeGreaterThan(0);
  }, 120_000);

  it('refuses a caller without a key, and a query-only key where it would change documents', async () => {
    const anon = await call('POST', '/v1/search', { query: 'fare' }, null);
    expect(anon.status).toBe(401);
    const upload = await call('POST', '/v1/collections/default/documents', { name: 'x.md', text: '# X\n\nText.' }, READER);
    expect(upload.status).toBe(403);
    const del = await call('DELETE', `/v1/collections/default/documents/${ids['night-fares.md']}`, undefined, READER);
    expect(del.status).toBe(403);
    expect((await call('POST', '/v1/search', { query: 'fare' }, READER)).status).toBe(200);
    expect((await call('GET', '/health', undefined, null)).status).toBe(200);
  }, 60_000);

  it('keeps one document for identical content, replaces a changed one, and forgets a deleted one', async () => {
    const same = await call('POST', '/v1/collections/default/documents', { name: 'night-fares.md', text: FARES });
    expect(same.status).toBe(200);
    expect(same.body.status).toBe('unchanged');
    await upload('night-fares.md', FARES_CHANGED);
    const changed = await waitFor(
      async () => {
        const r = await search('night fare costs', { mode: 'lexical' });
        const texts = (r.body.results as { text: string }[]).map((x) => x.text).join('\n');
        return texts.includes('3.60') ? texts : null;
      },
      { what: `${backend}: the replaced text to be searchable`, timeoutMs: 30_000, intervalMs: 25, detail: () => t.output() },
    );
    expect(changed).not.toContain('3.20');
    const docs = (await call('GET', '/v1/collections/default/documents')).body.documents as { source: string }[];
    expect(docs.map((d) => d.source).sort()).toEqual(['lost-property.md', 'night-fares.md']);
    const gone = await call('DELETE', `/v1/collections/default/documents/${ids['lost-property.md']}`);
    expect(gone.status, JSON.stringify(gone.body)).toBe(200);
    expect(gone.body.chunksRemoved).toBeGreaterThan(0);
    await searchUntil('lost property desk umbrellas', (s) => !s.includes('lost-property.md'), 'the deleted document to leave search');
    expect((await call('GET', `/v1/collections/default/documents/${ids['lost-property.md']}`)).status).toBe(404);
  }, 120_000);
}

describe('the API contract on the embedded back end', () => contract('sqlite', startSqlite));
describePg('the API contract on PostgreSQL (an API node and a worker)', () => contract('postgres', startPostgres));

describePg('the two back ends', () => {
  it('rank and cite alike: the same sources, sections and scores for every query and mode, the same citations', () => {
    const [a, b] = [observed.sqlite, observed.postgres];
    expect(a, 'the embedded back end ran').toBeDefined();
    expect(b, 'the PostgreSQL back end ran').toBeDefined();
    expect(a!.rankings.length).toBe(QUERIES.length * 3);
    for (const r of a!.rankings) expect((r as unknown[]).length, 'every query and mode found something').toBeGreaterThan(0);
    expect(a!.citations.length).toBeGreaterThan(0);
    expect(b!.rankings).toEqual(a!.rankings);
    expect(b!.citations).toEqual(a!.citations);
  });
});
