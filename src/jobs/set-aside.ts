import { mkdirSync, renameSync } from 'node:fs';
import path from 'node:path';
import type { JobRecord } from '../store/index.js';
import type { JobPayload } from './execute.js';

/** Where the file of a failed upload is kept: out of every folder that is walked, for someone to look at. */
export function failedUploadsDir(dataDir: string, collection: string): string {
  return path.join(dataDir, 'uploads-failed', collection);
}

/**
 * Moves the file of a failed upload out of the collection's upload folder, named after its job. Left there, a
 * file that took down its thread would take down every later walk of that folder (each re-index) too.
 * Returns where it went, or null when the job was no upload or its file is gone already.
 */
export function setAsideUpload(dataDir: string, job: Pick<JobRecord, 'id' | 'payload'>): string | null {
  const p = job.payload as JobPayload;
  if (p.kind !== 'upload') return null;
  const dir = failedUploadsDir(dataDir, p.collection);
  const to = path.join(dir, `${job.id}-${p.source}`);
  try {
    mkdirSync(dir, { recursive: true });
    renameSync(path.join(p.root, p.source), to);
    return to;
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return null;
    throw err;
  }
}
