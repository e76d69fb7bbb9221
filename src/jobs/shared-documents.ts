// The document API of an API node on the PostgreSQL back end. An upload is received into the shared folder
// (storage.sharedDir, reached by every node and worker), kept there as an original by content hash, and queued
// as a job in the database for whichever worker claims it first. Reads (list, get) answer from the node's local
// copy, which its follower keeps current; a deletion is written to the database and reaches every node,
// this one included, through the change log.

import { renameSync, rmSync, unlinkSync } from 'node:fs';
import path from 'node:path';
import { SourceboundError } from '../errors.js';
import type { DocumentRecord, JobRecord, Originals, Repository, SystemOfRecord } from '../store/index.js';
import type { DocumentService, DocumentSummary } from './documents.js';
import { checkFileName, documentSummary, findDocument } from './documents.js';
import type { JobPayload } from './execute.js';
import { receiveUpload } from './incoming.js';
import { deleteFailedUpload, listFailedUploadsOf } from './set-aside.js';

/** Where uploads and originals live in the shared folder. */
export function sharedPaths(sharedDir: string): { uploads: (collection: string) => string; originalsDir: string } {
  return { uploads: (collection) => path.join(sharedDir, 'uploads', collection), originalsDir: path.join(sharedDir, 'originals') };
}

export interface SharedDocumentDeps {
  sor: Pick<SystemOfRecord, 'ensureCollection' | 'getCollection' | 'deleteDocument' | 'jobs' | 'listCollections' | 'findDocumentByContent'>;
  local: Pick<Repository, 'getDocument' | 'listDocuments' | 'countChunks' | 'getCollection' | 'findDocumentByContent'>;
  sharedDir: string;
  originals: Originals;
  maxUploadBytes: number;
}

/** A failure to reach the database becomes a clear 503 (with Retry-After), not an internal error. */
async function reaching<T>(what: string, fn: () => Promise<T>): Promise<T> {
  try {
    return await fn();
  } catch (err) {
    if (err instanceof SourceboundError) throw err;
    throw new SourceboundError('SB_ERR_DATABASE_UNUSABLE', [`${what}: ${(err as Error).message}`]);
  }
}

export function createSharedDocumentService(deps: SharedDocumentDeps): DocumentService {
  const { local, originals } = deps;
  const raw = deps.sor;
  const sor: SharedDocumentDeps['sor'] = {
    ensureCollection: (n) => reaching('creating the collection', () => raw.ensureCollection(n)),
    getCollection: (n) => reaching('reading the collection', () => raw.getCollection(n)),
    deleteDocument: (id) => reaching('deleting the document', () => raw.deleteDocument(id)),
    listCollections: () => reaching('listing collections', () => raw.listCollections()),
    findDocumentByContent: (c, h) => reaching('looking for the same bytes', () => raw.findDocumentByContent(c, h)),
    jobs: {
      ...raw.jobs,
      create: (kind, collection, payload) => reaching('queueing the job', () => raw.jobs.create(kind, collection, payload)),
      get: (id) => reaching('reading the job', () => raw.jobs.get(id)),
      pendingUpload: (c, h) => reaching('looking for the same bytes', () => raw.jobs.pendingUpload(c, h)),
    },
  };
  const paths = sharedPaths(deps.sharedDir);
  const summary = (d: DocumentRecord): DocumentSummary => documentSummary(d, local.countChunks(d.id));
  const find = (collection: string, id: string): DocumentRecord => findDocument(local, collection, id);
  const knownCollection = async (collection: string): Promise<void> => {
    if (!local.getCollection(collection) && !(await sor.getCollection(collection))) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [collection]);
  };

  return {
    async upload(collection, rawName, body) {
      const name = checkFileName(rawName);
      const folder = paths.uploads(collection);
      const { tmp, contentHash } = await receiveUpload(folder, body, deps.maxUploadBytes);
      // The same bytes are looked for in the database, the system of record, not in this node's copy: another
      // node may have received them, and its job may still be waiting for a worker.
      let same: { id: string; source: string } | null;
      let pending: JobRecord | null;
      try {
        same = await sor.findDocumentByContent(collection, contentHash);
        pending = same ? null : await sor.jobs.pendingUpload(collection, contentHash);
      } catch (err) {
        unlinkSync(tmp);
        throw err;
      }
      if (same) {
        unlinkSync(tmp);
        return { status: 'unchanged', documentId: same.id, source: same.source };
      }
      if (pending) {
        unlinkSync(tmp);
        return { status: 'queued', job: pending, source: (pending.payload as { source?: string }).source ?? name };
      }
      // The original is kept before the job exists: a worker that claims the job at once finds it.
      originals.keep(collection, contentHash, tmp);
      renameSync(tmp, path.join(folder, name));
      await sor.ensureCollection(collection);
      const payload: JobPayload = { kind: 'upload', via: 'api', collection, root: folder, source: name, contentHash };
      const job = await sor.jobs.create('upload', collection, payload);
      return { status: 'queued', job, source: name };
    },
    list(collection) {
      if (!local.getCollection(collection)) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [collection]);
      return local.listDocuments(collection).map(summary);
    },
    get(collection, id) {
      return summary(find(collection, id));
    },
    async remove(collection, id) {
      const d = find(collection, id);
      const removed = await sor.deleteDocument(d.id);
      // The uploaded file goes too, or the next re-index of the upload folder would bring it back.
      if (d.root && d.root === paths.uploads(collection)) rmSync(path.join(d.root, d.source), { force: true });
      return { chunksRemoved: removed.length };
    },
    async job(id) {
      const j = await sor.jobs.get(id);
      if (!j) throw new SourceboundError('SB_ERR_UNKNOWN_JOB', [id]);
      return j;
    },
    async reindex(opts) {
      if (opts.collection) await knownCollection(opts.collection);
      const jobs = await enqueueReindex(sor, opts);
      return jobs[0]!;
    },
    async failedUploads(collection) {
      await knownCollection(collection);
      // A worker sets a failed upload's file aside in the shared folder (uploads-failed/<collection>/); its reason is on its job.
      return listFailedUploadsOf(deps.sharedDir, collection, (id) => sor.jobs.get(id));
    },
    deleteFailedUpload(collection, name) {
      deleteFailedUpload(deps.sharedDir, collection, name);
    },
  };
}

/**
 * Queues one re-index job per collection (the named one, or every one): workers run them in parallel, one per
 * collection at a time (each holds the collection's re-index lease). Returns the jobs, the first first.
 */
export async function enqueueReindex(
  sor: Pick<SystemOfRecord, 'jobs' | 'listCollections'>,
  opts: { collection?: string; full?: boolean },
): Promise<JobRecord[]> {
  const names = opts.collection ? [opts.collection] : (await sor.listCollections()).map((c) => c.name);
  if (names.length === 0) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', ['(none: the database holds no collection)']);
  const out: JobRecord[] = [];
  for (const collection of names) {
    const payload: JobPayload = { kind: 'reindex', via: 'api', collection, ...(opts.full ? { full: true } : {}) };
    out.push(await sor.jobs.create('reindex', collection, payload));
  }
  return out;
}
