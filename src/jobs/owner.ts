import { randomUUID } from 'node:crypto';
import { hostname } from 'node:os';
import type { JobOwner } from '../store/index.js';

// One holder id per thread (each worker thread loads this module afresh): a lease names its holder by this id,
// which no later process or thread can be given, unlike a process id.
const HOLDER = randomUUID();

/** This process (this thread of it), as the holder of the jobs and leases it takes. */
export function thisProcess(): JobOwner {
  return { pid: process.pid, host: hostname(), holder: HOLDER };
}

/** Whether a process of this host is still running (EPERM: running, but another user's). */
export function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

/**
 * Whether the process holding a job is gone. A job with no recorded owner (written before owners were) counts
 * as gone; one held on another host cannot be checked from here and counts as alive.
 */
export function ownerGone(owner: JobOwner | null): boolean {
  if (!owner) return true;
  if (owner.host !== hostname()) return false;
  return !processAlive(owner.pid);
}

/** The error a job gets when its process ended without finishing it. */
export function abandonedReason(owner: JobOwner | null): string {
  return owner
    ? `abandoned: process ${owner.pid} on ${owner.host} ended before the job finished`
    : 'abandoned: the process that ran it ended before the job finished';
}
