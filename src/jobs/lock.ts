import { hostname } from 'node:os';
import { mkdirSync, openSync, readFileSync, unlinkSync, writeSync, closeSync } from 'node:fs';
import path from 'node:path';
import { SourceboundError } from '../errors.js';
import { processAlive } from './owner.js';

interface LockInfo {
  pid: number;
  host: string;
  since: string;
}

/**
 * One re-index at a time per data folder. The lock file names its owner; a lock whose process is gone
 * (crash, SIGKILL) is stale and taken over, a live one makes the second run fail with a clear message.
 */
export async function withReindexLock<T>(dataDir: string, fn: () => Promise<T>): Promise<T> {
  const file = path.join(dataDir, 'reindex.lock');
  acquire(file);
  try {
    return await fn();
  } finally {
    try {
      unlinkSync(file);
    } catch {
      /* already gone */
    }
  }
}

function acquire(file: string): void {
  mkdirSync(path.dirname(file), { recursive: true });
  for (let attempt = 0; attempt < 2; attempt++) {
    try {
      const fd = openSync(file, 'wx');
      const info: LockInfo = { pid: process.pid, host: hostname(), since: new Date().toISOString() };
      writeSync(fd, JSON.stringify(info));
      closeSync(fd);
      return;
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
    }
    let owner: LockInfo | null = null;
    try {
      owner = JSON.parse(readFileSync(file, 'utf8')) as LockInfo;
    } catch {
      owner = null; // half-written by a process that died: stale
    }
    if (owner && owner.host === hostname() && processAlive(owner.pid)) {
      throw new SourceboundError('SB_ERR_REINDEX_RUNNING', [String(owner.pid), owner.since]);
    }
    if (owner && owner.host !== hostname()) {
      throw new SourceboundError('SB_ERR_REINDEX_RUNNING', [`${owner.pid} on ${owner.host}`, owner.since]);
    }
    try {
      unlinkSync(file); // stale: its owner is gone
    } catch {
      /* another process took it over first; retry */
    }
  }
  throw new SourceboundError('SB_ERR_REINDEX_RUNNING', ['another process', 'just now']);
}
