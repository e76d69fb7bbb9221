import { existsSync, readFileSync, readdirSync } from 'node:fs';
import path from 'node:path';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import type { JobQueue } from '../../src/jobs/index.js';
import { appDeps, createDocumentApi, type Runtime } from '../../src/runtime.js';
import { CLI } from '../fixtures/serve.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { runSync, withDeadline } from '../fixtures/wait.js';

// Originals are kept by content hash, so an unreadable upload under a good document's name never costs that
// document its original; failed uploads wait aside for an admin; identical uploads at once make one document.

let rt: Runtime;
let app: FastifyInstance;
let queue: JobQueue;
let cleanup: () => void;
let dataDir: string;

beforeAll(async () => {
  const made = await tempRuntime();
  ({ rt, cleanup, dataDir } = made);
  const api = createDocumentApi(rt, 'inline');
  queue = api.queue;
  app = buildApp(made.config, appDeps(rt, () => true, api.documents));
  await app.ready();
});
afterAll(async () => {
  await app.close();
  await queue.close();
  cleanup();
});

const idle = () => withDeadline(queue.idle(), { what: 'the upload jobs to finish', timeoutMs: 20_000 });

function multipart(name: string, bytes: Buffer): { payload: Buffer; headers: Record<string, string> } {
  const boundary = '----sbfailedboundary91';
  const head = Buffer.from(`--${boundary}\r\nContent-Disposition: form-data; name="file"; filename="${name}"\r\nContent-Type: application/octet-stream\r\n\r\n`);
  const tail = Buffer.from(`\r\n--${boundary}--\r\n`);
  return { payload: Buffer.concat([head, bytes, tail]), headers: { 'content-type': `multipart/form-data; boundary=${boundary}` } };
}
const upload = (collection: string, name: string, bytes: Buffer) =>
  app.inject({ method: 'POST', url: `/v1/collections/${collection}/documents`, ...multipart(name, bytes) });

const GOOD = Buffer.from('# Fares\n\nA single tram fare in Brackenfold is 1.80 and a day ticket is 5.40.\n');
// Binary content under a text extension: the loader refuses it (docs/operations.md).
const CORRUPT = Buffer.concat([Buffer.from('# Fares\n'), Buffer.alloc(4096, 0), Buffer.from([0xff, 0xfe, 0x00, 0x01])]);

describe('a corrupt re-upload under a good document\'s name', () => {
  it('fails, is set aside once, and leaves the good version indexed, in its folder and openable', async () => {
    const first = await upload('fares', 'fares.md', GOOD);
    expect(first.statusCode).toBe(202);
    await idle();
    const docs = (await app.inject({ method: 'GET', url: '/v1/collections/fares/documents' })).json().documents as { id: string; contentHash: string }[];
    expect(docs).toHaveLength(1);
    const good = docs[0]!;

    const bad = await upload('fares', 'fares.md', CORRUPT);
    expect(bad.statusCode).toBe(202);
    await idle();
    const job = (await app.inject({ method: 'GET', url: `/v1/jobs/${bad.json().jobId}` })).json();
    expect(job.state).toBe('failed');

    // The document is the good version still, and so is what "open the original" gives.
    expect((await app.inject({ method: 'GET', url: `/v1/collections/fares/documents/${good.id}` })).json().contentHash).toBe(good.contentHash);
    const original = await app.inject({ method: 'GET', url: `/v1/collections/fares/documents/${good.id}/original` });
    expect(original.statusCode).toBe(200);
    expect(original.rawPayload.equals(GOOD)).toBe(true);
    // The upload folder holds the good version again, so a re-index finds the file as it was indexed.
    expect(readFileSync(path.join(dataDir, 'uploads', 'fares', 'fares.md')).equals(GOOD)).toBe(true);

    const listed = (await app.inject({ method: 'GET', url: '/v1/collections/fares/failed-uploads' })).json().failedUploads;
    expect(listed).toEqual([
      { name: `${job.id}-fares.md`, jobId: job.id, source: 'fares.md', bytes: CORRUPT.length, failedAt: job.finishedAt, reason: job.error },
    ]);

    // `sourcebound reindex` never walks the failed uploads: exit 0, no failures, and the failure is still listed once.
    const r = runSync(process.execPath, [CLI, 'reindex', '--json'], {
      env: { ...process.env, SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent' },
      what: 'sourcebound reindex',
    });
    expect(r.status, r.stderr).toBe(0);
    expect(JSON.parse(r.stdout)).toMatchObject({ documents: { failed: 0 }, failures: [] });
    expect((await app.inject({ method: 'GET', url: '/v1/collections/fares/failed-uploads' })).json().failedUploads).toHaveLength(1);

    const del = await app.inject({ method: 'DELETE', url: `/v1/collections/fares/failed-uploads/${encodeURIComponent(listed[0].name)}` });
    expect(del.statusCode).toBe(200);
    expect(readdirSync(path.join(dataDir, 'uploads-failed', 'fares'))).toEqual([]);
    const again = await app.inject({ method: 'DELETE', url: `/v1/collections/fares/failed-uploads/${encodeURIComponent(listed[0].name)}` });
    expect(again.statusCode).toBe(404);
    expect(again.json().error.code).toBe('SB_ERR_UNKNOWN_FAILED_UPLOAD');
    // Only the good version's original is kept: the failed one's copy went with its job.
    expect(readdirSync(path.join(dataDir, 'originals', 'fares'))).toEqual([good.contentHash]);
  });

  it('is refused a delete of anything but a listed name', async () => {
    for (const name of ['..%2F..%2Fsourcebound.db', 'fares.md', '00000000-0000-0000-0000-000000000000-fares.md']) {
      const res = await app.inject({ method: 'DELETE', url: `/v1/collections/fares/failed-uploads/${name}` });
      expect(res.statusCode, name).toBe(404);
    }
    expect(existsSync(path.join(dataDir, 'sourcebound.db'))).toBe(true);
  });
});

describe('identical uploads at once', () => {
  it('make one document: 12 uploads of the same bytes under different names, the others told which one they duplicate', async () => {
    const bytes = Buffer.from('# Lost property\n\nItems left on a Marrowgate bus are kept at the depot office for 30 days.\n');
    const replies = await Promise.all(Array.from({ length: 12 }, (_, i) => upload('lost', `lost-property-${i + 1}.md`, bytes)));
    const queued = replies.filter((r) => r.statusCode === 202);
    expect(queued).toHaveLength(1);
    const winner = queued[0]!.json() as { source: string; jobId: string };
    for (const r of replies.filter((x) => x.statusCode !== 202)) {
      expect(r.statusCode).toBe(200);
      const body = r.json();
      // Duplicate of the upload being ingested, or (once it has been) of the document it made.
      if (body.status === 'duplicate') {
        expect(body.duplicateOf).toEqual({ source: winner.source, jobId: winner.jobId, job: `/v1/jobs/${winner.jobId}` });
        expect(body.message).toContain(`"${winner.source}"`);
      } else {
        expect(body).toMatchObject({ status: 'unchanged', source: winner.source });
      }
    }
    await idle();
    const docs = (await app.inject({ method: 'GET', url: '/v1/collections/lost/documents' })).json().documents as { source: string }[];
    expect(docs.map((d) => d.source)).toEqual([winner.source]);
    expect(readdirSync(path.join(dataDir, 'uploads', 'lost'))).toEqual([winner.source]);
  });
});
