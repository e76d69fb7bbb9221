import { hostname } from 'node:os';
import type { JobOwner } from '../store/index.js';

/** This process, as the owner of the jobs it starts or claims. */
export function thisProcess(): JobOwner {
  return { pid: process.pid, host: hostname() };
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
