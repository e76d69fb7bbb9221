import { existsSync, readdirSync } from 'node:fs';
import path from 'node:path';
import { Readable } from 'node:stream';
import { expect, it } from 'vitest';
import { createSharedDocumentService, createSharedWorker, thisProcess } from '../../src/jobs/index.js';
import type { Ingestor } from '../../src/ingest/index.js';
import { silentLogger } from '../../src/logger.js';
import { createOriginals } from '../../src/store/index.js';
import { describePg, emptyLocalCopy, pgSuiteState } from '../fixtures/pg.js';

// The failed-uploads list on the PostgreSQL back end: a worker whose upload job fails sets the file aside in the
// shared folder, named after its job; any node lists it with the job's reason and can delete it.
const copy = emptyLocalCopy(['default']);

describePg('failed uploads on the PostgreSQL back end', () => {
  const pg = pgSuiteState({ tempPrefix: 'sb-failed-', max: 3 });

  it('sets the file of a failed upload aside, lists it with its reason, and deletes it when asked', async () => {
    const { sor, dir: shared } = pg;
    const originals = createOriginals(path.join(shared, 'originals'));
    const node = createSharedDocumentService({ sor, local: copy, sharedDir: shared, originals, maxUploadBytes: 1 << 20 });
    const up = await node.upload('default', 'rota.md', Readable.from([Buffer.from('# Depot rota\n\nEarly shift starts at 04:45.\n')]));
    expect(up.status).toBe('queued');
    const jobId = (up as { job: { id: string } }).job.id;
    expect(await node.failedUploads('default')).toEqual([]);

    // The pipeline refuses the file (as a loader does with a damaged one).
    const ingestor = {
      settingsKey: 'k',
      ingestPath: async () => ({ failures: [{ source: 'rota.md', reason: 'the file could not be read' }] }),
    } as unknown as Pick<Ingestor, 'ingestPath' | 'settingsKey'>;
    const worker = createSharedWorker({
      sor, ingestor, readScratch: () => null, modelId: 'm', sharedDir: shared, originals,
      stagingDir: path.join(shared, 'staging'), owner: thisProcess(), leaseMs: 60_000, logger: silentLogger(),
    });
    expect(await worker.runOnce()).toBe(true);
    expect(await sor.jobs.get(jobId)).toMatchObject({ state: 'failed', error: 'rota.md: the file could not be read' });

    // Out of the upload folder a re-index walks, into uploads-failed/<collection>/.
    expect(existsSync(path.join(shared, 'uploads', 'default', 'rota.md'))).toBe(false);
    const listed = await node.failedUploads('default');
    expect(listed).toHaveLength(1);
    expect(listed[0]).toMatchObject({ name: `${jobId}-rota.md`, jobId, source: 'rota.md', reason: 'rota.md: the file could not be read' });
    expect(listed[0]!.bytes).toBeGreaterThan(20);
    await expect(Promise.resolve().then(() => node.failedUploads('nope'))).rejects.toThrow();

    node.deleteFailedUpload('default', `${jobId}-rota.md`);
    expect(await node.failedUploads('default')).toEqual([]);
    expect(readdirSync(path.join(shared, 'uploads-failed', 'default'))).toEqual([]);
    expect(() => node.deleteFailedUpload('default', `${jobId}-rota.md`)).toThrow();
  });
});
