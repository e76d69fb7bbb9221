// Jobs and their leases in PostgreSQL. A running job records who holds it and until when; the holder renews it
// (its heartbeat), and once it expires unrenewed any claimer may take the job over. Times come from the
// database's clock, the one clock every API node and worker shares, however far their own clocks drift.

import { randomUUID } from 'node:crypto';
import type { JobOwner, JobRecord, JobState } from '../types.js';
import type { AsyncJobStore } from '../system-of-record.js';
import type { PgPool } from './connect.js';

type Row = Record<string, unknown>;

const toJob = (r: Row): JobRecord => ({
  id: r.id as string,
  kind: r.kind as string,
  collection: (r.collection as string | null) ?? null,
  state: r.state as JobState,
  attempts: r.attempts as number,
  payload: r.payload,
  result: r.result ?? null,
  error: (r.error as string | null) ?? null,
  createdAt: r.created_at as string,
  startedAt: (r.started_at as string | null) ?? null,
  finishedAt: (r.finished_at as string | null) ?? null,
  owner:
    typeof r.owner_pid === 'number' && typeof r.owner_host === 'string'
      ? { pid: r.owner_pid, host: r.owner_host, holder: (r.lease_holder as string | null) ?? '' }
      : null,
});

const checkLease = (leaseMs: number): void => {
  if (!Number.isSafeInteger(leaseMs) || leaseMs < 1) throw new Error(`a lease of ${leaseMs} ms is not a positive whole number of milliseconds`);
};

/**
 * A job is claimable when queued, or running under a lease that has expired and with attempts left ($1: the most
 * attempts, or NULL for no limit). The limit sits in the claim itself: a lease that runs out between failing the
 * exhausted jobs and claiming must not hand one out again.
 */
const CLAIMABLE = "(state = 'queued' OR (state = 'running' AND lease_expires_at <= now() AND ($1::int IS NULL OR attempts < $1::int)))";

export function pgJobs(pool: PgPool): AsyncJobStore {
  const finish = async (id: string, holder: string, state: 'succeeded' | 'failed', result: unknown, error: string | null): Promise<boolean> => {
    const r = await pool.query(
      `UPDATE jobs SET state = $3, result = $4, error = $5, finished_at = now()
       WHERE id = $1 AND state = 'running' AND lease_holder = $2`,
      [id, holder, state, result === undefined ? null : JSON.stringify(result), error],
    );
    return r.rowCount === 1;
  };

  return {
    async create(kind, collection, payload = {}) {
      const r = await pool.query("INSERT INTO jobs (id, kind, collection, state, payload) VALUES ($1, $2, $3, 'queued', $4) RETURNING *", [
        randomUUID(),
        kind,
        collection,
        JSON.stringify(payload),
      ]);
      return toJob(r.rows[0] as Row);
    },

    async get(id) {
      const r = await pool.query('SELECT * FROM jobs WHERE id = $1', [id]);
      return r.rows[0] ? toJob(r.rows[0] as Row) : null;
    },

    async claimNext(owner: JobOwner, opts) {
      checkLease(opts.leaseMs);
      const kinds = opts.kinds ? [...opts.kinds] : null;
      const max = opts.maxAttempts ?? null;
      if (opts.maxAttempts !== undefined) {
        // Abandoned once too often: failed, not handed out again (a job that kills its worker would do so forever).
        await pool.query(
          `UPDATE jobs SET state = 'failed', finished_at = now(),
             error = 'gave up after ' || attempts || ' attempts: the lease of the last one expired unrenewed'
           WHERE state = 'running' AND lease_expires_at <= now() AND attempts >= $1`,
          [opts.maxAttempts],
        );
      }
      // SKIP LOCKED: a claimer passes over rows another is claiming instead of queueing behind it. Under READ
      // COMMITTED, a row another claimer took between this statement's snapshot and its lock is re-checked
      // against the condition and dropped, which can leave LIMIT 1 with nothing though other jobs wait: then
      // try again while claimable jobs remain.
      for (let tries = 0; tries < 5; tries++) {
        const r = await pool.query(
          `WITH picked AS (
             SELECT id FROM jobs WHERE ${CLAIMABLE} AND ($2::text[] IS NULL OR kind = ANY($2::text[]))
             ORDER BY created_at, id LIMIT 1 FOR UPDATE SKIP LOCKED
           )
           UPDATE jobs j SET state = 'running', attempts = j.attempts + 1, started_at = now(), owner_pid = $3, owner_host = $4,
             lease_holder = $5, heartbeat_at = now(), lease_expires_at = now() + $6 * interval '1 millisecond',
             result = NULL, error = NULL
           FROM picked WHERE j.id = picked.id
           RETURNING j.*`,
          [max, kinds, owner.pid, owner.host, owner.holder, opts.leaseMs],
        );
        if (r.rows[0]) return toJob(r.rows[0] as Row);
        const left = await pool.query(`SELECT 1 FROM jobs WHERE ${CLAIMABLE} AND ($2::text[] IS NULL OR kind = ANY($2::text[])) LIMIT 1`, [max, kinds]);
        if (left.rowCount === 0) return null;
      }
      return null;
    },

    async renew(id, holder, leaseMs) {
      checkLease(leaseMs);
      const r = await pool.query(
        `UPDATE jobs SET heartbeat_at = now(), lease_expires_at = now() + $3 * interval '1 millisecond'
         WHERE id = $1 AND state = 'running' AND lease_holder = $2`,
        [id, holder, leaseMs],
      );
      return r.rowCount === 1;
    },

    async renewAll(holder, leaseMs) {
      checkLease(leaseMs);
      const r = await pool.query(
        `UPDATE jobs SET heartbeat_at = now(), lease_expires_at = now() + $2 * interval '1 millisecond'
         WHERE state = 'running' AND lease_holder = $1`,
        [holder, leaseMs],
      );
      return r.rowCount ?? 0;
    },

    succeed: (id, holder, result) => finish(id, holder, 'succeeded', result, null),
    fail: (id, holder, error, result) => finish(id, holder, 'failed', result, error),

    async counts() {
      const r = await pool.query<{ state: JobState; count: number }>('SELECT state, count(*)::int AS count FROM jobs GROUP BY state ORDER BY state');
      return r.rows;
    },

    async pendingUpload(collection, contentHash) {
      const r = await pool.query(
        "SELECT * FROM jobs WHERE kind = 'upload' AND collection = $1 AND state IN ('queued', 'running') AND payload->>'contentHash' = $2 ORDER BY created_at LIMIT 1",
        [collection, contentHash],
      );
      return r.rows[0] ? toJob(r.rows[0] as Row) : null;
    },
  };
}
