import { renameSync, rmSync, unlinkSync } from 'node:fs';
import path from 'node:path';
import type { Readable } from 'node:stream';
import { SourceboundError } from '../errors.js';
import type { DocumentRecord, JobRecord } from '../store/index.js';
import type { JobContext } from './context.js';
import { receiveUpload, uploadsDir } from './incoming.js';
import type { JobPayload } from './execute.js';
import type { JobQueue } from './queue.js';
import { deleteFailedUpload, listFailedUploads, type FailedUpload } from './set-aside.js';

export type UploadOutcome =
  | { status: 'queued'; job: JobRecord; source: string }
  | { status: 'unchanged'; documentId: string; source: string }
  /** The same content is being ingested already, from another upload (under `of.source`, by job `of.job`). */
  | { status: 'duplicate'; source: string; of: { source: string; job: JobRecord } };

export interface DocumentSummary {
  id: string;
  source: string;
  title: string;
  format: string;
  byteSize: number;
  pageCount: number | null;
  effectiveDate: string | null;
  contentHash: string;
  chunks: number;
  metadata: Record<string, string>;
  updatedAt: string;
}

export interface DocumentService {
  /** Streams an upload to disk (bounded), then queues its ingestion; identical content is a no-op. */
  upload(collection: string, name: string, body: Readable | Uint8Array): Promise<UploadOutcome>;
  list(collection: string): DocumentSummary[];
  get(collection: string, id: string): DocumentSummary;
  /** Synchronous on the embedded back end; a promise where the system of record is reached over the network. */
  remove(collection: string, id: string): { chunksRemoved: number } | Promise<{ chunksRemoved: number }>;
  job(id: string): JobRecord | Promise<JobRecord>;
  reindex(opts: { collection?: string; full?: boolean }): JobRecord | Promise<JobRecord>;
  /** Uploads whose job failed, kept aside in `uploads-failed/<collection>/` (never walked by a re-index). */
  failedUploads(collection: string): FailedUpload[] | Promise<FailedUpload[]>;
  /** Deletes one of them by its listed name. */
  deleteFailedUpload(collection: string, name: string): void;
}

/** The document service of the embedded back end: every answer at once. */
export interface LocalDocumentService extends DocumentService {
  remove(collection: string, id: string): { chunksRemoved: number };
  job(id: string): JobRecord;
  failedUploads(collection: string): FailedUpload[];
  reindex(opts: { collection?: string; full?: boolean }): JobRecord;
}

// Every format the ingest reads (src/ingest/detect.ts), Word files included.
const ALLOWED_EXTENSIONS = new Set(['.pdf', '.docx', '.md', '.markdown', '.html', '.htm', '.txt', '.text']);

/** Rejects anything but a plain file name: no folders, no traversal, no hidden or control characters. */
export function checkFileName(name: string): string {
  const n = name.normalize('NFC');
  const bad = (why: string): never => {
    throw new SourceboundError('SB_ERR_BAD_FILE_NAME', [why]);
  };
  if (n.length === 0 || n.length > 200) bad('a file name is 1-200 characters');
  if (/[/\\]/u.test(n)) bad('no slashes or backslashes');
  // Unicode's control (Cc: C0, DEL and C1), format (Cf: bidirectional overrides such as U+202E,
  // zero-width characters) and line/paragraph separator (Zl, Zp) categories: none shows as itself.
  if (/[\p{Cc}\p{Cf}\p{Zl}\p{Zp}]/u.test(n)) bad('no control, invisible formatting or line-separator characters');
  if (n.startsWith('.') || n === '..') bad('a file name may not start with "."');
  if (!/^[\p{L}\p{N}]/u.test(n)) bad('a file name starts with a letter or digit');
  const ext = path.extname(n).toLowerCase();
  if (!ALLOWED_EXTENSIONS.has(ext)) bad(`the extension must be one of ${[...ALLOWED_EXTENSIONS].join(', ')}`);
  return n;
}

/** A document as the documents API lists it (both back ends). */
export function documentSummary(d: DocumentRecord, chunks: number): DocumentSummary {
  return {
    id: d.id,
    source: d.source,
    title: d.title,
    format: d.format,
    byteSize: d.byteSize,
    pageCount: d.pageCount,
    effectiveDate: d.effectiveDate,
    contentHash: d.contentHash,
    chunks,
    metadata: d.metadata,
    updatedAt: d.updatedAt,
  };
}

/** The document `id` of `collection` in `store`; SB_ERR_UNKNOWN_DOCUMENT when there is none. */
export function findDocument(store: { getDocument(id: string): DocumentRecord | null }, collection: string, id: string): DocumentRecord {
  const d = store.getDocument(id);
  if (!d || d.collection !== collection) throw new SourceboundError('SB_ERR_UNKNOWN_DOCUMENT', [id]);
  return d;
}

export function createDocumentService(ctx: JobContext, queue: JobQueue): LocalDocumentService {
  const { store } = ctx;
  const uploadsRoot = uploadsDir(ctx.dataDir);
  const maxBytes = ctx.maxUploadBytes;

  const summary = (d: DocumentRecord): DocumentSummary => documentSummary(d, store.countChunks(d.id));
  const find = (collection: string, id: string): DocumentRecord => findDocument(store, collection, id);

  return {
    async upload(collection, rawName, body) {
      const name = checkFileName(rawName);
      const folder = path.join(uploadsRoot, collection);
      const { tmp, contentHash } = await receiveUpload(folder, body, maxBytes);
      const same = store.findDocumentByContent(collection, contentHash);
      if (same) {
        unlinkSync(tmp);
        return { status: 'unchanged', documentId: same.id, source: same.source };
      }
      // Uploads of the same bytes at once (under other names, say) make one document: the first is ingested,
      // the rest are told which upload they duplicate. Nothing awaits between this check and the enqueue below,
      // so two uploads in this process cannot both pass it.
      const pending = store.jobs.activeUpload(collection, contentHash);
      if (pending) {
        unlinkSync(tmp);
        return { status: 'duplicate', source: name, of: { source: (pending.payload as Extract<JobPayload, { kind: 'upload' }>).source, job: pending } };
      }
      // Kept by content hash before the file takes its name: a later upload under the same name replaces the
      // folder's file, never this copy of the version that is indexed.
      ctx.originals.keep(collection, contentHash, tmp);
      renameSync(tmp, path.join(folder, name));
      store.ensureCollection(collection);
      store.addSourceRoot(collection, folder);
      const job = queue.enqueue({ kind: 'upload', via: 'api', collection, root: folder, source: name, contentHash });
      return { status: 'queued', job, source: name };
    },
    list(collection) {
      if (!store.getCollection(collection)) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [collection]);
      return store.listDocuments(collection).map(summary);
    },
    get(collection, id) {
      return summary(find(collection, id));
    },
    remove(collection, id) {
      const d = find(collection, id);
      const removed = store.deleteDocument(d.id);
      // An uploaded file goes too, or the next re-index of the upload folder would bring it back.
      if (d.root && d.root === path.join(uploadsRoot, collection)) rmSync(path.join(d.root, d.source), { force: true });
      if (!store.findDocumentByContent(collection, d.contentHash)) ctx.originals.drop(collection, d.contentHash);
      // A deletion is a deletion: its chunks are marked deleted in place and the index saved, with no re-walk.
      const generation = store.collectionState(collection)?.generation;
      if (generation !== undefined) ctx.indexes.apply(collection, { generation, removed, added: [] });
      ctx.indexes.sync(collection);
      return { chunksRemoved: removed.length };
    },
    job(id) {
      const j = store.jobs.get(id);
      if (!j) throw new SourceboundError('SB_ERR_UNKNOWN_JOB', [id]);
      return j;
    },
    reindex(opts) {
      if (opts.collection && !store.getCollection(opts.collection)) {
        throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [opts.collection]);
      }
      return queue.enqueue({ kind: 'reindex', via: 'api', ...opts });
    },
    failedUploads(collection) {
      if (!store.getCollection(collection)) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [collection]);
      return listFailedUploads(ctx.dataDir, collection, store.jobs);
    },
    deleteFailedUpload(collection, name) {
      deleteFailedUpload(ctx.dataDir, collection, name);
    },
  };
}
