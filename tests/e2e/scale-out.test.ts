import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../../src/store/pg/index.js';
import pg from 'pg';
import { createTestDatabase, describePg, PG_ADMIN_URL, type TestDatabase } from '../fixtures/pg.js';
import { mulberry32 } from '../fixtures/random.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { startServe, type ServeProcess } from '../fixtures/serve.js';
import { waitFor, waitForExit } from '../fixtures/wait.js';
import { startWorker, type WorkerProcess } from '../fixtures/worker.js';

// Three API nodes and two workers on one PostgreSQL database, all real processes on loopback (docs/scale-out.md).

const NIGHT_BUSES = `# Night bus service

Night buses N1 to N4 run every 30 minutes between 00:30 and 05:00 on Friday and Saturday nights.
A night fare costs 3.20 and day tickets bought before midnight stay valid until 05:00.

# Night bus stops

Night buses stop only at stops marked with the moon symbol. Drivers do not stop on request between marked stops.
`;

/** A long rulebook (about 250 kB), so its job takes long enough to be interrupted. */
function rulebook(): string {
  const rnd = mulberry32(17);
  const words = ['fare', 'ticket', 'tram', 'depot', 'driver', 'platform', 'refund', 'pass', 'route', 'timetable', 'conductor', 'inspection', 'validator', 'zone', 'transfer'];
  const parts: string[] = [];
  for (let s = 0; s < 150; s++) {
    parts.push(`# Rule section ${s + 1}\n`);
    for (let p = 0; p < 6; p++) {
      const n = 40 + Math.floor(rnd() * 30);
      parts.push(`${Array.from({ length: n }, () => `${words[Math.floor(rnd() * words.length)]}${Math.floor(rnd() * 500)}`).join(' ')}.\n`);
    }
  }
  return parts.join('\n');
}

const post = async (base: string, route: string, body: unknown) => {
  const r = await fetch(`${base}${route}`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
  return { status: r.status, body: (await r.json()) as Record<string, unknown> };
};

type Citation = { documentId: string; source: string; page: number | null; section: string; quote: string };

describePg('scale-out: API nodes and workers on one PostgreSQL database', () => {
  let db: TestDatabase;
  let sor: PgSystemOfRecord;
  const dirs: string[] = [];
  const nodes: ServeProcess[] = [];
  const dataDirOf = new Map<ServeProcess, string>();
  const workers: WorkerProcess[] = [];
  let env: Record<string, string>;
  const dir = (): string => {
    const d = mkdtempSync(path.join(tmpdir(), 'sb-scale-'));
    dirs.push(d);
    return d;
  };

  beforeAll(async () => {
    db = await createTestDatabase();
    sor = await openPgSystemOfRecord(db.url, { max: 2 });
    const config = path.join(dir(), 'config.json');
    // A short lease so a killed worker's job is taken over within seconds; a short poll as the safety net.
    writeFileSync(config, JSON.stringify({ storage: { backend: 'postgres', followPollMs: 250 }, limits: { jobLeaseSeconds: 3 } }));
    env = { SOURCEBOUND_CONFIG: config, SOURCEBOUND_DATABASE_URL: db.url, SOURCEBOUND_SHARED_DIR: dir(), SOURCEBOUND_LOG_LEVEL: 'info' };
    const nodeDirs = [dir(), dir(), dir()];
    const started = await Promise.all([
      ...nodeDirs.map((d) => startServe({ ...env, SOURCEBOUND_DATA_DIR: d })),
      ...[0, 1].map(() => startWorker({ ...env, SOURCEBOUND_DATA_DIR: dir() })),
    ]);
    nodes.push(...(started.slice(0, 3) as ServeProcess[]));
    nodes.forEach((n, i) => dataDirOf.set(n, nodeDirs[i]!));
    workers.push(...(started.slice(3) as WorkerProcess[]));
  }, 120_000);

  afterAll(async () => {
    for (const p of [...nodes, ...workers]) await p.stop().catch(() => undefined);
    await sor?.close();
    await db?.drop();
    for (const d of dirs) rmSync(d, { recursive: true, force: true });
  });

  it('answers a document uploaded through node A with the same citations on B and C within 2 s of its job finishing', async () => {
    const [a, b, c] = nodes as [ServeProcess, ServeProcess, ServeProcess];
    for (const n of nodes) expect((await fetch(`${n.base}/ready`)).status).toBe(200);
    const up = await post(a.base, '/v1/collections/default/documents', { name: 'night-buses.md', text: NIGHT_BUSES });
    expect(up.status, JSON.stringify(up.body)).toBe(202);
    const jobId = up.body.jobId as string;
    await waitFor(async () => ((await (await fetch(`${a.base}/v1/jobs/${jobId}`)).json()) as { state: string }).state === 'succeeded', {
      what: `upload job ${jobId} to succeed`,
      intervalMs: 20,
      detail: () => workers.map((w) => w.output()).join('\n'),
    });
    const finished = performance.now();
    const question = { question: 'How often do night buses run?', collection: 'default', mode: 'extractive' };
    const cited = async (base: string) => {
      const r = await post(base, '/v1/answer', question);
      const cites = (r.body.citations as Citation[] | undefined) ?? [];
      return r.status === 200 && cites.some((x) => x.source === 'night-buses.md') ? { cites, position: r.body.indexPosition as number } : null;
    };
    const [onB, onC] = await Promise.all([b, c].map((n) => waitFor(() => cited(n.base), { what: `node ${n.base} to cite the upload`, timeoutMs: 10_000, intervalMs: 20 })));
    const took = performance.now() - finished;
    expect(took, 'ms from the job finishing to both nodes citing the upload').toBeLessThan(2000);
    const onA = await waitFor(() => cited(a.base), { what: 'node A to cite the upload', timeoutMs: 10_000 });
    expect(onB!.cites).toEqual(onA.cites);
    expect(onC!.cites).toEqual(onA.cites);
    expect(onB!.position).toBeGreaterThan(0);
    const search = await post(b.base, '/v1/search', { query: 'night fare', collection: 'default' });
    expect(search.body.indexPosition).toBeGreaterThanOrEqual(onB!.position);
    // A desk rating given on node C is kept in the database, not in C's local copy.
    const rated = await post(c.base, '/v1/ratings', { question: question.question, answer: 'Every 30 minutes.', abstained: false, helpful: true });
    expect(rated.status, JSON.stringify(rated.body)).toBe(201);
    expect((await sor.ratings.list({ collection: 'default' })).map((x) => x.id)).toEqual([rated.body.id]);
  }, 60_000);

  it('finishes a job on the other worker after the killed one\'s lease expires, with nothing lost or doubled', async () => {
    const text = rulebook();
    const form = new FormData();
    form.append('file', new Blob([text], { type: 'text/markdown' }), 'rulebook.md');
    const r = await fetch(`${nodes[0]!.base}/v1/collections/default/documents`, { method: 'POST', body: form });
    expect(r.status).toBe(202);
    const jobId = ((await r.json()) as { jobId: string }).jobId;
    const running = await waitFor(
      async () => {
        const j = await sor.jobs.get(jobId);
        if (j?.state === 'succeeded') throw new Error('the job finished before a worker could be killed in it');
        return j?.state === 'running' ? j : null;
      },
      { what: `job ${jobId} to be running`, intervalMs: 5 },
    );
    const victim = workers.find((w) => w.child.pid === running.owner!.pid)!;
    expect(victim, 'the job is held by one of the two workers').toBeDefined();
    victim.child.kill('SIGKILL');
    await waitForExit(victim.child, { what: 'the killed worker to exit' });
    const done = await waitFor(
      async () => {
        const j = await sor.jobs.get(jobId);
        return j && (j.state === 'succeeded' || j.state === 'failed') ? j : null;
      },
      { what: `job ${jobId} to be finished by the other worker`, timeoutMs: 60_000, intervalMs: 50, detail: () => workers.map((w) => w.output().slice(-3000)).join('\n---\n') },
    );
    expect(done.state, String(done.error)).toBe('succeeded');
    expect(done.attempts).toBe(2);
    expect(done.owner?.pid).not.toBe(victim.child.pid);
    // A clean run of the same file: the embedded back end, with the same settings.
    const clean = await tempRuntime();
    try {
      const folder = dir();
      writeFileSync(path.join(folder, 'rulebook.md'), text);
      await clean.rt.ingestor.ingestPath(path.join(folder, 'rulebook.md'), { collection: 'default' });
      const expected = clean.rt.repo.getCollection('default')!.chunks;
      const docs = await sor.listDocuments('default');
      expect(docs.map((d) => d.source).sort()).toEqual(['night-buses.md', 'rulebook.md']);
      const rule = docs.find((d) => d.source === 'rulebook.md')!;
      const copy = (await sor.documentCopy(rule.id, 'none'))!;
      expect(copy.chunks.length).toBe(expected);
      const night = (await sor.documentCopy(docs.find((d) => d.source === 'night-buses.md')!.id, 'none'))!;
      expect((await sor.getCollection('default'))!.chunks).toBe(expected + night.chunks.length);
    } finally {
      clean.cleanup();
    }
  }, 120_000);

  it('reports not-ready with a 503 and Retry-After while the database refuses connections, and answers again once it is back, without a restart', async () => {
    const node = nodes[1]!;
    const admin = new pg.Client({ connectionString: PG_ADMIN_URL });
    await admin.connect();
    try {
      // The database goes away for the nodes: no new connection is allowed, and every open one is closed.
      await admin.query(`ALTER DATABASE ${db.name} ALLOW_CONNECTIONS false`);
      await admin.query('SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = $1 AND pid <> pg_backend_pid()', [db.name]);
      await waitFor(async () => (await fetch(`${node.base}/ready`)).status === 503, { what: 'the node to report not-ready', timeoutMs: 15_000, intervalMs: 50 });
      const refused = await fetch(`${node.base}/v1/answer`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ question: 'When do night buses run?' }) });
      expect(refused.status).toBe(503);
      expect(refused.headers.get('retry-after')).toBe('1');
      const upload = await post(node.base, '/v1/collections/default/documents', { name: 'depot-hours.md', text: '# Depot hours\nThe depot office opens at seven.' });
      expect(upload.status).toBe(503);
    } finally {
      await admin.query(`ALTER DATABASE ${db.name} ALLOW_CONNECTIONS true`);
      await admin.end();
    }
    await waitFor(async () => (await fetch(`${node.base}/ready`)).status === 200, { what: 'the node to be ready again', timeoutMs: 15_000, intervalMs: 50 });
    const again = await post(node.base, '/v1/answer', { question: 'How often do night buses run?', mode: 'extractive' });
    expect(again.status).toBe(200);
    expect((again.body.citations as Citation[]).some((x) => x.source === 'night-buses.md')).toBe(true);
  }, 60_000);

  it('keeps answering on the other nodes while one is SIGKILLed under load, and the killed one, restarted, catches up and becomes ready', async () => {
    const [a, b, c] = nodes as [ServeProcess, ServeProcess, ServeProcess];
    const cDir = dataDirOf.get(c)!;
    const results: { base: string; status: number }[] = [];
    let stop = false;
    const load = async (base: string): Promise<void> => {
      while (!stop) {
        try {
          const r = await post(base, '/v1/answer', { question: 'How often do night buses run?', mode: 'extractive' });
          results.push({ base, status: r.status });
        } catch {
          results.push({ base, status: 0 });
        }
      }
    };
    const running = [load(a.base), load(b.base)];
    await waitFor(() => results.length >= 10, { what: 'the load to be under way', timeoutMs: 20_000 });
    c.child.kill('SIGKILL');
    await waitForExit(c.child, { what: 'the killed node to exit' });
    const atKill = results.length;
    await waitFor(() => results.length >= atKill + 20, { what: 'answers after the kill', timeoutMs: 20_000 });
    // A document written while the node is down: the restarted node must catch up to it.
    const up = await post(a.base, '/v1/collections/default/documents', { name: 'tram-depot.md', text: '# Tram depot\nThe tram depot tour runs on the first Sunday of each month.' });
    expect(up.status).toBe(202);
    const jobId = up.body.jobId as string;
    await waitFor(async () => (await sor.jobs.get(jobId))?.state === 'succeeded', { what: `job ${jobId} to succeed` });
    const head = await sor.changeHead();
    stop = true;
    await Promise.all(running);
    expect(results.filter((r) => r.status !== 200), 'failed answers on the nodes still running').toEqual([]);
    const restarted = await startServe({ ...env, SOURCEBOUND_DATA_DIR: cDir });
    nodes[2] = restarted;
    expect((await fetch(`${restarted.base}/ready`)).status).toBe(200);
    const health = (await (await fetch(`${restarted.base}/health`)).json()) as { follower: { position: number } };
    expect(health.follower.position).toBeGreaterThanOrEqual(head);
    const r = await post(restarted.base, '/v1/search', { query: 'tram depot tour', collection: 'default', mode: 'lexical' });
    expect((r.body.results as { source: string }[])[0]?.source).toBe('tram-depot.md');
  }, 90_000);
});
