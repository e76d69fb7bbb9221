import { mkdirSync, mkdtempSync, rmSync, unlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import { createSharedWorker, enqueueReindex, sharedPaths, type SharedWorker } from '../../src/jobs/index.js';
import { silentLogger } from '../../src/logger.js';
import { createOriginals, readLocalDocument } from '../../src/store/index.js';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../../src/store/pg/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../fixtures/pg.js';
import { rawDb, tempRuntime } from '../fixtures/runtime.js';

type Temp = Awaited<ReturnType<typeof tempRuntime>>;

describePg('a worker on the PostgreSQL back end', () => {
  let db: TestDatabase;
  let sor: PgSystemOfRecord;
  let scratch: Temp;
  let shared: string;
  let worker: SharedWorker;
  const owner = { pid: process.pid, host: 'desk-worker-1', holder: 'holder-under-test' };

  beforeAll(async () => {
    db = await createTestDatabase();
    sor = await openPgSystemOfRecord(db.url, { max: 3 });
    scratch = await tempRuntime();
    shared = mkdtempSync(path.join(tmpdir(), 'sb-shared-'));
    worker = createSharedWorker({
      sor,
      ingestor: scratch.rt.ingestor,
      readScratch: (id) => readLocalDocument(rawDb(scratch.rt), id, scratch.rt.embedder.id),
      modelId: scratch.rt.embedder.id,
      sharedDir: shared,
      originals: createOriginals(sharedPaths(shared).originalsDir),
      stagingDir: path.join(scratch.dataDir, 'staging'),
      owner,
      leaseMs: 5000,
      logger: silentLogger(),
    });
  }, 60_000);
  afterAll(async () => {
    await worker?.close();
    scratch?.cleanup();
    await sor?.close();
    await db?.drop();
    rmSync(shared, { recursive: true, force: true });
  });

  const put = (name: string, text: string): void => {
    const folder = sharedPaths(shared).uploads('depot');
    mkdirSync(folder, { recursive: true });
    writeFileSync(path.join(folder, name), text);
  };

  it('re-indexes a collection from its shared upload folder: new files written, unchanged ones left, missing ones removed', async () => {
    await sor.ensureCollection('depot');
    put('opening-hours.md', '# Depot opening hours\nThe depot office opens at seven and closes at noon.');
    put('parking.md', '# Staff parking\nStaff park behind the tram shed, never on the bus apron.');
    const [job] = await enqueueReindex(sor, { collection: 'depot' });
    expect(await worker.runOnce()).toBe(true);
    expect(await sor.jobs.get(job!.id)).toMatchObject({ state: 'succeeded', result: { written: 2, unchanged: 0, removed: 0, failed: 0 } });
    expect((await sor.listDocuments('depot')).map((d) => d.source)).toEqual(['opening-hours.md', 'parking.md']);
    const head = await sor.changeHead();

    unlinkSync(path.join(sharedPaths(shared).uploads('depot'), 'parking.md'));
    const [again] = await enqueueReindex(sor, { collection: 'depot' });
    expect(await worker.runOnce()).toBe(true);
    expect(await sor.jobs.get(again!.id)).toMatchObject({ state: 'succeeded', result: { written: 0, unchanged: 1, removed: 1, failed: 0 } });
    expect((await sor.listDocuments('depot')).map((d) => d.source)).toEqual(['opening-hours.md']);
    // Only the removal was logged: the unchanged document was not written again.
    const after = await sor.changesSince(head);
    expect(after.entries.every((e) => e.kind === 'chunk-removed')).toBe(true);
  });

  it('fails a re-index of a collection whose re-index lease another holder has, naming it', async () => {
    const other = { pid: 4242, host: 'desk-worker-2', holder: 'another-holder' };
    const got = await sor.leases.acquire('reindex:depot', other, 60_000);
    expect(got.acquired).toBe(true);
    try {
      const [job] = await enqueueReindex(sor, { collection: 'depot' });
      expect(await worker.runOnce()).toBe(true);
      const done = await sor.jobs.get(job!.id);
      expect(done?.state).toBe('failed');
      expect(done?.error).toMatch(/re-index of depot is running \(held by 4242 on desk-worker-2\)/);
    } finally {
      await sor.leases.release('reindex:depot', other.holder);
    }
  });

  it('writes an upload job once even when it is run twice (a takeover after the write)', async () => {
    put('lockers.md', '# Lockers\nEach driver has a locker in the depot; keys are kept at the office.');
    const folder = sharedPaths(shared).uploads('depot');
    const payload = { kind: 'upload', via: 'api', collection: 'depot', root: folder, source: 'lockers.md' };
    await sor.jobs.create('upload', 'depot', payload);
    expect(await worker.runOnce()).toBe(true);
    const head = await sor.changeHead();
    const second = await sor.jobs.create('upload', 'depot', payload);
    expect(await worker.runOnce()).toBe(true);
    expect(await sor.jobs.get(second.id)).toMatchObject({ state: 'succeeded', result: { outcome: 'unchanged' } });
    expect(await sor.changeHead()).toBe(head);
    expect((await sor.getCollection('depot'))!.documents).toBe(2);
  });
});
