import { SourceboundError } from '../errors.js';
import type { JobOwner, LeaseStore } from '../store/index.js';
import { ownerGone } from './owner.js';

/** The lease that lets one re-index run at a time per store. */
export const REINDEX_LEASE = 'reindex';

export interface LeaseDeps {
  leases: LeaseStore;
  /** Who takes the lease (src/jobs/owner.ts). */
  owner: JobOwner;
  /** How long the lease lasts without a heartbeat; it is renewed every third of this while `fn` runs. */
  leaseMs: number;
}

/**
 * One re-index at a time per store, held as a lease in the database rather than a file naming a process id:
 * a holder that crashes (or whose host goes away) stops renewing it, and once it has expired the next re-index
 * takes it over; at once when the holder was a process of this host that has ended. A live lease makes a
 * second run fail with a clear message.
 */
export async function withReindexLock<T>(deps: LeaseDeps, fn: () => Promise<T>): Promise<T> {
  const { leases, owner, leaseMs } = deps;
  // A holder whose process on this host has ended is known to be gone without waiting for its lease to expire.
  const got = leases.acquire(REINDEX_LEASE, owner, leaseMs, ownerGone);
  if (!got.acquired) {
    const h = got.held.owner;
    throw new SourceboundError('SB_ERR_REINDEX_RUNNING', [`${h.pid} on ${h.host}`, got.held.acquiredAt]);
  }
  const heartbeat = setInterval(() => leases.renew(REINDEX_LEASE, owner.holder, leaseMs), Math.max(1000, Math.floor(leaseMs / 3)));
  heartbeat.unref();
  try {
    return await fn();
  } finally {
    clearInterval(heartbeat);
    leases.release(REINDEX_LEASE, owner.holder);
  }
}
