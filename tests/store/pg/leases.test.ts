import { afterAll, beforeAll, expect, it } from 'vitest';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../../../src/store/pg/index.js';
import type { JobOwner } from '../../../src/store/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../../fixtures/pg.js';
import { waitFor } from '../../fixtures/wait.js';

const owner = (holder: string): JobOwner => ({ pid: 7, host: `node-${holder}`, holder });
const MINUTE = 60_000;

describePg('PostgreSQL named leases', () => {
  let db: TestDatabase;
  let a: PgSystemOfRecord;
  let b: PgSystemOfRecord;
  beforeAll(async () => {
    db = await createTestDatabase();
    a = await openPgSystemOfRecord(db.url, { max: 4 });
    b = await openPgSystemOfRecord(db.url, { max: 4 });
  });
  afterAll(async () => {
    await a?.close();
    await b?.close();
    await db?.drop();
  });

  it('gives a lease to exactly one of many nodes asking at once', async () => {
    const tries = await Promise.all(Array.from({ length: 8 }, (_, i) => (i % 2 ? a : b).leases.acquire('reindex:staff', owner(`n${i}`), MINUTE)));
    const winners = tries.filter((t) => t.acquired);
    expect(winners).toHaveLength(1);
    const holder = winners[0]!.acquired ? winners[0]!.lease.owner.holder : '';
    for (const t of tries) if (!t.acquired) expect(t.held.owner.holder).toBe(holder);
    expect((await a.leases.get('reindex:staff'))?.owner).toEqual(owner(holder));
    await a.leases.release('reindex:staff', holder);
    expect(await a.leases.get('reindex:staff')).toBeNull();
  });

  it('keeps the first start when its holder takes it again, and renews only for its holder', async () => {
    const first = await a.leases.acquire('reindex:public', owner('p'), MINUTE);
    expect(first.acquired).toBe(true);
    const again = await a.leases.acquire('reindex:public', owner('p'), MINUTE);
    expect(again.acquired && again.lease.acquiredAt).toBe(first.acquired && first.lease.acquiredAt);
    expect(await b.leases.renew('reindex:public', 'q', MINUTE)).toBe(false);
    expect(await a.leases.renew('reindex:public', 'p', MINUTE)).toBe(true);
    // Release by someone else leaves it held.
    await b.leases.release('reindex:public', 'q');
    expect((await b.leases.get('reindex:public'))?.owner.holder).toBe('p');
  });

  it('lets another node take a lease its holder stopped renewing', async () => {
    expect((await a.leases.acquire('reindex:archive', owner('old'), MINUTE)).acquired).toBe(true);
    expect((await b.leases.acquire('reindex:archive', owner('new'), MINUTE)).acquired).toBe(false);
    expect(await a.leases.renew('reindex:archive', 'old', 1)).toBe(true);
    const taken = await waitFor(async () => {
      const t = await b.leases.acquire('reindex:archive', owner('new'), MINUTE);
      return t.acquired ? t : null;
    }, { what: 'the expired lease to be taken over' });
    expect(taken.lease.owner).toEqual(owner('new'));
    expect(await a.leases.renew('reindex:archive', 'old', MINUTE)).toBe(false);
  });
});
