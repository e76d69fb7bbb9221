import { afterAll, beforeAll, expect, it } from 'vitest';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../../../src/store/pg/index.js';
import type { JobOwner } from '../../../src/store/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../../fixtures/pg.js';
import { waitFor } from '../../fixtures/wait.js';

const owner = (holder: string): JobOwner => ({ pid: 4242, host: 'desk-node-1', holder });
const MINUTE = 60_000;

describePg('PostgreSQL jobs and their leases', () => {
  let db: TestDatabase;
  let a: PgSystemOfRecord;
  let b: PgSystemOfRecord;
  beforeAll(async () => {
    db = await createTestDatabase();
    // Two pools: two API nodes claiming from the same queue.
    a = await openPgSystemOfRecord(db.url, { max: 4 });
    b = await openPgSystemOfRecord(db.url, { max: 4 });
  });
  afterAll(async () => {
    await a?.close();
    await b?.close();
    await db?.drop();
  });
  const drain = async () => {
    await a.pool.query("UPDATE jobs SET state = 'succeeded' WHERE state IN ('queued', 'running')");
  };

  it('hands each job to exactly one of two concurrent claimers', async () => {
    await drain();
    const created = [];
    for (let i = 0; i < 40; i++) created.push((await a.jobs.create('upload', 'staff', { via: 'api', n: i })).id);
    const claimAll = async (sor: PgSystemOfRecord, holder: string) => {
      const got: string[] = [];
      for (;;) {
        const j = await sor.jobs.claimNext(owner(holder), { leaseMs: MINUTE });
        if (!j) return got;
        expect(j.state).toBe('running');
        expect(j.owner).toEqual(owner(holder));
        got.push(j.id);
      }
    };
    // Three claimers on each node, all at once.
    const results = await Promise.all([claimAll(a, 'a1'), claimAll(a, 'a2'), claimAll(a, 'a3'), claimAll(b, 'b1'), claimAll(b, 'b2'), claimAll(b, 'b3')]);
    const all = results.flat();
    expect(all.length).toBe(created.length);
    expect(new Set(all)).toEqual(new Set(created));
    const attempts = (await a.pool.query<{ n: number }>('SELECT max(attempts) AS n FROM jobs WHERE id = ANY($1)', [created])).rows[0]!.n;
    expect(attempts).toBe(1);
  });

  it('claims the oldest job first, and only of the kinds asked for', async () => {
    await drain();
    const first = await a.jobs.create('reindex', 'staff');
    const second = await a.jobs.create('upload', 'staff');
    expect((await a.jobs.claimNext(owner('k'), { leaseMs: MINUTE, kinds: ['upload'] }))?.id).toBe(second.id);
    expect((await a.jobs.claimNext(owner('k'), { leaseMs: MINUTE }))?.id).toBe(first.id);
    expect(await a.jobs.claimNext(owner('k'), { leaseMs: MINUTE })).toBeNull();
  });

  it('leaves a live lease alone, and lets another holder take over one that expired unrenewed', async () => {
    await drain();
    const job = await a.jobs.create('upload', 'staff', { via: 'api' });
    expect((await a.jobs.claimNext(owner('alive'), { leaseMs: MINUTE }))?.id).toBe(job.id);
    expect(await b.jobs.claimNext(owner('other'), { leaseMs: MINUTE })).toBeNull();
    expect(await a.jobs.renew(job.id, 'alive', MINUTE)).toBe(true);

    // Its holder stops renewing (a crashed node): the lease is cut short to 1 ms and left to run out.
    expect(await a.jobs.renew(job.id, 'alive', 1)).toBe(true);
    const taken = await waitFor(() => b.jobs.claimNext(owner('heir'), { leaseMs: MINUTE }), { what: 'the expired lease to be taken over' });
    expect(taken).toMatchObject({ id: job.id, state: 'running', attempts: 2, owner: owner('heir') });

    // The old holder has lost it: its heartbeat and its result are refused, the new holder's are not.
    expect(await a.jobs.renew(job.id, 'alive', MINUTE)).toBe(false);
    expect(await a.jobs.renewAll('alive', MINUTE)).toBe(0);
    expect(await a.jobs.succeed(job.id, 'alive', { late: true })).toBe(false);
    expect(await b.jobs.renewAll('heir', MINUTE)).toBe(1);
    expect(await b.jobs.succeed(job.id, 'heir', { documents: 3 })).toBe(true);
    expect(await a.jobs.get(job.id)).toMatchObject({ state: 'succeeded', result: { documents: 3 }, error: null });
    expect((await a.jobs.get(job.id))!.finishedAt).toMatch(/^\d{4}-\d\d-\d\dT/);
    // A finished job is never claimed again.
    expect(await b.jobs.claimNext(owner('late'), { leaseMs: MINUTE })).toBeNull();
  });

  it('fails a job whose lease expired after its last allowed attempt instead of handing it out again', async () => {
    await drain();
    const job = await a.jobs.create('upload', 'staff');
    await a.jobs.claimNext(owner('x'), { leaseMs: MINUTE, maxAttempts: 2 });
    await a.jobs.renew(job.id, 'x', 1);
    await waitFor(() => a.jobs.claimNext(owner('y'), { leaseMs: MINUTE, maxAttempts: 2 }), { what: 'the second attempt to take the job' });
    await a.jobs.renew(job.id, 'y', 1);
    await waitFor(async () => (await a.jobs.get(job.id))!.state === 'failed' || (await a.jobs.claimNext(owner('z'), { leaseMs: MINUTE, maxAttempts: 2 })), {
      what: 'the job to fail or be claimed a third time',
    });
    const end = await a.jobs.get(job.id);
    expect(end).toMatchObject({ state: 'failed', attempts: 2 });
    expect(end!.error).toMatch(/gave up after 2 attempts/);
  });

  it('records failures with their reason, counts jobs by state, and refuses a lease that is not a positive whole number', async () => {
    await drain();
    const countOf = async () => Object.fromEntries((await a.jobs.counts()).map((c) => [c.state, c.count])) as Record<string, number | undefined>;
    const before = await countOf();
    const job = await a.jobs.create('upload', 'staff');
    expect((await countOf()).queued).toBe(1);
    await a.jobs.claimNext(owner('f'), { leaseMs: MINUTE });
    expect((await countOf()).running).toBe(1);
    expect(await a.jobs.fail(job.id, 'f', 'the file is not a PDF', { skipped: 1 })).toBe(true);
    expect(await a.jobs.get(job.id)).toMatchObject({ state: 'failed', error: 'the file is not a PDF', result: { skipped: 1 } });
    const after = await countOf();
    expect(after.failed).toBe((before.failed ?? 0) + 1);
    expect([after.queued, after.running]).toEqual([undefined, undefined]);
    await expect(a.jobs.claimNext(owner('f'), { leaseMs: 0 })).rejects.toThrow(/positive whole number/);
    await expect(a.jobs.renew(job.id, 'f', 1.5)).rejects.toThrow(/positive whole number/);
  });
});
