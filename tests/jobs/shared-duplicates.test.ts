import { readdirSync } from 'node:fs';
import path from 'node:path';
import { Readable } from 'node:stream';
import { expect, it } from 'vitest';
import { createSharedDocumentService } from '../../src/jobs/index.js';
import { createOriginals } from '../../src/store/index.js';
import { describePg, emptyLocalCopy, pgSuiteState } from '../fixtures/pg.js';

// Duplicate uploads on the PostgreSQL back end are found in the database, not in the receiving node's copy: two
// nodes whose copies hold nothing yet receive the same bytes; the second gets the first's job, and once a worker
// has written the document, the same bytes are answered "unchanged" with it.
const TIMETABLE = '# Tram timetable\n\nTrams run every 8 minutes from 06:00 to 23:30 on weekdays.\n';

const emptyCopy = emptyLocalCopy();

describePg('duplicate uploads checked against the database', () => {
  const pg = pgSuiteState({ tempPrefix: 'sb-dup-', max: 3 });

  it('answers a second upload of the same bytes with the pending job, then with the stored document', async () => {
    const { sor, dir: shared } = pg;
    const node = () => createSharedDocumentService({ sor, local: emptyCopy, sharedDir: shared, originals: createOriginals(path.join(shared, 'originals')), maxUploadBytes: 1 << 20 });
    const a = node();
    const b = node();
    const first = await a.upload('default', 'timetable.md', Readable.from([Buffer.from(TIMETABLE)]));
    expect(first.status).toBe('queued');
    const firstJob = (first as { job: { id: string } }).job.id;
    const second = await b.upload('default', 'timetable-copy.md', Readable.from([Buffer.from(TIMETABLE)]));
    expect(second).toMatchObject({ status: 'queued', source: 'timetable.md', job: { id: firstJob } });
    // Only the first upload's file stays in the upload folder; no second job was made.
    expect(readdirSync(path.join(shared, 'uploads', 'default')).filter((n) => !n.startsWith('.'))).toEqual(['timetable.md']);
    expect((await sor.jobs.counts()).reduce((n, c) => n + c.count, 0)).toBe(1);

    // Other bytes are a new job.
    const other = await b.upload('default', 'fares.md', Readable.from([Buffer.from('# Fares\n\nA single fare costs 2.10.\n')]));
    expect(other.status).toBe('queued');
    expect((other as { job: { id: string } }).job.id).not.toBe(firstJob);

    // A worker has written the document (as replaceDocument does): the same bytes are now "unchanged".
    const hash = (first as { job: { payload: { contentHash: string } } }).job.payload.contentHash;
    await sor.replaceDocument(
      { id: 'tt', collection: 'default', source: 'timetable.md', root: path.join(shared, 'uploads', 'default'), title: 'Tram timetable', format: 'markdown', contentHash: hash, byteSize: TIMETABLE.length, pageCount: null, effectiveDate: null, metadata: {}, settingsKey: 's', text: TIMETABLE },
      [{ ordinal: 0, text: TIMETABLE, start: 0, end: TIMETABLE.length, headingPath: ['Tram timetable'], pageStart: null, pageEnd: null, tokenCount: 12, chunkHash: 'c0' }],
      new Map(),
      'm',
    );
    expect(await b.upload('default', 'again.md', Readable.from([Buffer.from(TIMETABLE)]))).toEqual({ status: 'unchanged', documentId: 'tt', source: 'timetable.md' });
  });
});
