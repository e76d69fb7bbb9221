// A worker on the PostgreSQL back end (`sourcebound worker`): claims jobs from the database (FOR UPDATE SKIP
// LOCKED, so two workers never take the same one), holds each under a lease renewed by a heartbeat, and runs the
// embedded pipeline unchanged: the upload is read, chunked and embedded into the worker's own scratch store (an
// SQLite file in its data folder, which also keeps the vectors it has made, so unchanged chunks are not embedded
// twice), then the document is written to the database with `replaceDocument`: its rows, chunks, vectors and
// change-log entries in one transaction. A worker killed mid-job stops renewing its lease; once the lease has
// expired another worker claims the job and runs it again. Writing a document is a replacement, and a document
// the database already holds with the same bytes and settings is left alone, so a job run twice writes it once.

import { copyFileSync, existsSync, mkdirSync, readdirSync, renameSync, statSync } from 'node:fs';
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import path from 'node:path';
import type { Ingestor } from '../ingest/index.js';
import { documentId } from '../ingest/index.js';
import type { Logger } from '../logger.js';
import type { JobOwner, JobRecord, Originals, ReplicaDocument, SystemOfRecord } from '../store/index.js';
import type { JobPayload } from './execute.js';
import { heartbeatMs } from './queue.js';
import { failedUploadsDir } from './set-aside.js';
import { sharedPaths } from './shared-documents.js';

/** Times a job is claimed before a lease that keeps expiring fails it (a job that kills every worker). */
const MAX_ATTEMPTS = 3;

export interface SharedWorkerDeps {
  sor: SystemOfRecord;
  ingestor: Pick<Ingestor, 'ingestPath' | 'settingsKey'>;
  /** A document of the scratch store with its chunks and vectors, as the pipeline left it. */
  readScratch(id: string): ReplicaDocument | null;
  /** The embedder's id: the model the vectors are stored under. */
  modelId: string;
  sharedDir: string;
  originals: Originals;
  /** A folder of this worker's own where uploads are staged under their names for the loaders. */
  stagingDir: string;
  owner: JobOwner;
  leaseMs: number;
  logger: Logger;
  /** How often to look for a job when none was waiting. */
  pollMs?: number;
}

export interface SharedWorker {
  /** Claims and runs one job; false when none was waiting. */
  runOnce(): Promise<boolean>;
  /** Runs jobs until closed. */
  start(): void;
  /** Stops after the job in hand (if any) ends. */
  close(): Promise<void>;
}

const sha256 = async (file: string): Promise<string> => createHash('sha256').update(await readFile(file)).digest('hex');

export function createSharedWorker(deps: SharedWorkerDeps): SharedWorker {
  const { sor, ingestor, owner, leaseMs, logger } = deps;
  const log = logger.child({ stage: 'worker' });
  const paths = sharedPaths(deps.sharedDir);
  let closed = false;
  let loop: Promise<void> | null = null;
  let wakeUp: (() => void) | null = null;

  /** Ingests one file of the shared folder into the scratch store and writes the document to the database. */
  const publish = async (collection: string, source: string, file: string, contentHash: string, force: boolean): Promise<'written' | 'unchanged'> => {
    const id = documentId(collection, source);
    const held = await sor.getDocument(id);
    if (!force && held && held.contentHash === contentHash && held.settingsKey === ingestor.settingsKey) return 'unchanged';
    const staged = path.join(deps.stagingDir, collection, source);
    mkdirSync(path.dirname(staged), { recursive: true });
    copyFileSync(file, staged);
    const summary = await ingestor.ingestPath(staged, { collection, remember: false, ...(force ? { force: true } : {}) });
    const failed = summary.failures.find((f) => f.source === source);
    if (failed) throw new Error(`${source}: ${failed.reason}`);
    const doc = deps.readScratch(id);
    if (!doc) throw new Error(`${source}: the pipeline stored no document`);
    await sor.replaceDocument(
      { ...doc.doc, root: paths.uploads(collection) },
      doc.chunks.map(({ id: _id, ...c }) => c),
      doc.vectors,
      deps.modelId,
    );
    return 'written';
  };

  const runUpload = async (p: Extract<JobPayload, { kind: 'upload' }>): Promise<unknown> => {
    const original = p.contentHash ? deps.originals.find(p.collection, p.contentHash) : null;
    const file = original ?? path.join(paths.uploads(p.collection), p.source);
    if (!existsSync(file)) throw new Error(`${p.source}: the upload is in neither the shared originals nor the upload folder`);
    const outcome = await publish(p.collection, p.source, file, p.contentHash ?? (await sha256(file)), false);
    return { document: documentId(p.collection, p.source), outcome };
  };

  /** Brings a collection's documents in line with its shared upload folder, holding the collection's re-index lease. */
  const runReindex = async (p: Extract<JobPayload, { kind: 'reindex' }>): Promise<unknown> => {
    const collection = p.collection!;
    const lease = `reindex:${collection}`;
    const got = await sor.leases.acquire(lease, owner, leaseMs);
    if (!got.acquired) throw new Error(`a re-index of ${collection} is running (held by ${got.held.owner.pid} on ${got.held.owner.host})`);
    const beat = setInterval(() => void sor.leases.renew(lease, owner.holder, leaseMs).catch(() => {}), heartbeatMs(leaseMs));
    beat.unref();
    try {
      const folder = paths.uploads(collection);
      // In name order, as the embedded ingest walks a folder: documents (and so chunk ids) come out in the same order.
      const files = existsSync(folder) ? readdirSync(folder).filter((n) => !n.startsWith('.') && statSync(path.join(folder, n)).isFile()).sort((a, b) => (a < b ? -1 : a > b ? 1 : 0)) : [];
      const counts = { written: 0, unchanged: 0, removed: 0, failed: 0 };
      for (const name of files) {
        try {
          const file = path.join(folder, name);
          const hash = await sha256(file);
          deps.originals.keep(collection, hash, file);
          counts[await publish(collection, name, file, hash, p.full ?? false)]++;
        } catch (err) {
          counts.failed++;
          log.warn({ collection, source: name, err: (err as Error).message }, 'document not re-indexed');
        }
      }
      const present = new Set(files);
      for (const d of await sor.listDocuments(collection)) {
        if (d.root === folder && !present.has(d.source)) {
          await sor.deleteDocument(d.id);
          counts.removed++;
        }
      }
      return counts;
    } finally {
      clearInterval(beat);
      await sor.leases.release(lease, owner.holder).catch(() => {});
    }
  };

  /**
   * Moves a failed upload's file out of the collection's shared upload folder into uploads-failed/<collection>/,
   * named after its job, as the embedded back end does: a re-index would otherwise take it up again. Only when the
   * file there still holds the failed bytes (a later upload of the same name is left alone); when the database
   * holds a document of that name, its kept original goes back into the upload folder.
   */
  const setAsideShared = async (job: JobRecord): Promise<string | null> => {
    const p = job.payload as JobPayload;
    if (p.kind !== 'upload') return null;
    const from = path.join(paths.uploads(p.collection), p.source);
    if (!existsSync(from) || (p.contentHash && (await sha256(from)) !== p.contentHash)) return null;
    const dir = failedUploadsDir(deps.sharedDir, p.collection);
    const to = path.join(dir, `${job.id}-${p.source}`);
    mkdirSync(dir, { recursive: true });
    renameSync(from, to);
    const indexed = await sor.getDocument(documentId(p.collection, p.source));
    const kept = indexed ? deps.originals.find(p.collection, indexed.contentHash) : null;
    if (kept && !existsSync(from)) copyFileSync(kept, from);
    return to;
  };

  const run = async (job: JobRecord): Promise<void> => {
    const jlog = log.child({ jobId: job.id, kind: job.kind });
    const beat = setInterval(() => void sor.jobs.renewAll(owner.holder, leaseMs).catch(() => {}), heartbeatMs(leaseMs));
    beat.unref();
    try {
      const p = job.payload as JobPayload;
      const result = p.kind === 'upload' ? await runUpload(p) : p.kind === 'reindex' ? await runReindex(p) : null;
      if (result === null) throw new Error(`unknown job kind ${job.kind}`);
      const kept = await sor.jobs.succeed(job.id, owner.holder, result);
      jlog.info({ result, kept }, kept ? 'job succeeded' : 'job finished after its lease was taken over; the other holder records it');
    } catch (err) {
      const failed = await sor.jobs.fail(job.id, owner.holder, (err as Error).message).catch(() => false);
      const setAside = failed ? await setAsideShared(job).catch((e: unknown) => `not set aside: ${(e as Error).message}`) : null;
      jlog.warn({ err: (err as Error).message, setAside }, 'job failed');
    } finally {
      clearInterval(beat);
    }
  };

  const runOnce = async (): Promise<boolean> => {
    const job = await sor.jobs.claimNext(owner, { leaseMs, maxAttempts: MAX_ATTEMPTS, kinds: ['upload', 'reindex'] });
    if (!job) return false;
    await run(job);
    return true;
  };

  return {
    runOnce,
    start() {
      if (loop) return;
      loop = (async () => {
        while (!closed) {
          let worked = false;
          try {
            worked = await runOnce();
          } catch (err) {
            log.warn({ err: (err as Error).message }, 'could not claim a job; retrying');
          }
          if (!worked && !closed) {
            await new Promise<void>((resolve) => {
              const t = setTimeout(resolve, deps.pollMs ?? 500);
              wakeUp = () => {
                clearTimeout(t);
                resolve();
              };
            });
            wakeUp = null;
          }
        }
      })();
    },
    async close() {
      closed = true;
      wakeUp?.();
      await loop;
    },
  };
}
