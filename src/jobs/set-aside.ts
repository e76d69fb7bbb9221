import { copyFileSync, existsSync, mkdirSync, readdirSync, renameSync, rmSync, statSync } from 'node:fs';
import path from 'node:path';
import { SourceboundError } from '../errors.js';
import type { JobRecord } from '../store/index.js';
import type { JobContext } from './context.js';
import type { JobPayload } from './execute.js';

/** Where the file of a failed upload is kept: out of every folder that is walked, for someone to look at. */
export function failedUploadsDir(dataDir: string, collection: string): string {
  return path.join(dataDir, 'uploads-failed', collection);
}

/** A job id (a UUID) and the file's name: how a failed upload is named in its folder. */
const FAILED_NAME = /^([0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12})-(.+)$/;

type SetAsideContext = Pick<JobContext, 'dataDir' | 'originals'> & { store: Pick<JobContext['store'], 'getDocumentBySource' | 'findDocumentByContent'> };

/**
 * Moves the file of a failed upload out of the collection's upload folder, named after its job. Left there, a
 * file that took down its thread would take down every later walk of that folder (each re-index) too. When the
 * upload replaced a document of the same name, the indexed version's kept original goes back into the folder,
 * so the folder, the index and "open the original" agree again. Returns where the failed file went, or null
 * when the job was no upload or its file is gone already.
 */
export function setAsideUpload(ctx: SetAsideContext, job: Pick<JobRecord, 'id' | 'payload'>): string | null {
  const p = job.payload as JobPayload;
  if (p.kind !== 'upload') return null;
  const dir = failedUploadsDir(ctx.dataDir, p.collection);
  const to = path.join(dir, `${job.id}-${p.source}`);
  const from = path.join(p.root, p.source);
  let moved: string | null = to;
  try {
    mkdirSync(dir, { recursive: true });
    renameSync(from, to);
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code !== 'ENOENT') throw err;
    moved = null;
  }
  const indexed = ctx.store.getDocumentBySource(p.collection, p.source);
  const kept = indexed ? ctx.originals.find(p.collection, indexed.contentHash) : null;
  if (kept && !existsSync(from)) copyFileSync(kept, from);
  // The failed version's kept copy serves no document.
  if (p.contentHash && p.contentHash !== indexed?.contentHash && !ctx.store.findDocumentByContent(p.collection, p.contentHash)) {
    ctx.originals.drop(p.collection, p.contentHash);
  }
  return moved;
}

/** A failed upload waiting in `uploads-failed/<collection>/` for someone to look at it. */
export interface FailedUpload {
  /** Its name in that folder: `<job id>-<file name>`. */
  name: string;
  jobId: string;
  source: string;
  bytes: number;
  failedAt: string;
  /** Why its job failed. */
  reason: string | null;
}

export function listFailedUploads(dataDir: string, collection: string, jobs: Pick<JobContext['store']['jobs'], 'get'>): FailedUpload[] {
  return keptFailures(dataDir, collection).map((f) => withJob(f, jobs.get(f.jobId)));
}

/** The same list where jobs are read from the database (the PostgreSQL back end keeps the folder in the shared folder). */
export async function listFailedUploadsOf(dir: string, collection: string, getJob: (id: string) => Promise<JobRecord | null>): Promise<FailedUpload[]> {
  const out: FailedUpload[] = [];
  for (const f of keptFailures(dir, collection)) out.push(withJob(f, await getJob(f.jobId)));
  return out;
}

type KeptFailure = Omit<FailedUpload, 'failedAt' | 'reason'> & { mtime: string };

function keptFailures(dataDir: string, collection: string): KeptFailure[] {
  const dir = failedUploadsDir(dataDir, collection);
  if (!existsSync(dir)) return [];
  return readdirSync(dir)
    .sort()
    .flatMap((name) => {
      const m = FAILED_NAME.exec(name);
      if (!m) return [];
      const st = statSync(path.join(dir, name));
      if (!st.isFile()) return [];
      return [{ name, jobId: m[1]!, source: m[2]!, bytes: st.size, mtime: st.mtime.toISOString() }];
    });
}

function withJob(f: KeptFailure, job: JobRecord | null | undefined): FailedUpload {
  return { name: f.name, jobId: f.jobId, source: f.source, bytes: f.bytes, failedAt: job?.finishedAt ?? f.mtime, reason: job?.error ?? null };
}

/** Deletes one failed upload by its name in the folder (as listed); nothing else can be named. */
export function deleteFailedUpload(dataDir: string, collection: string, name: string): void {
  const dir = failedUploadsDir(dataDir, collection);
  if (!FAILED_NAME.test(name) || name.includes('/') || name.includes('\\') || !existsSync(path.join(dir, name))) {
    throw new SourceboundError('SB_ERR_UNKNOWN_FAILED_UPLOAD', [name]);
  }
  rmSync(path.join(dir, name), { force: true });
}
