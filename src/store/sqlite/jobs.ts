// Jobs and their leases in SQLite. A running job records who holds it and until when (its lease, renewed by the
// holder's heartbeat), so a job whose holder is gone (a crashed server or CLI run, here or on another host) can be
// told from one still running elsewhere.

import { randomUUID } from 'node:crypto';
import type { JobOwner, JobRecord, JobState, JobStore } from '../types.js';
import type { Db } from './db.js';

/** Jobs the server's queue runs (uploads and re-indexes through the API); others are CLI runs and seeds. */
const QUEUED_KIND = "json_extract(payload, '$.via') = 'api'";

const ownerOf = (r: Record<string, unknown>): JobOwner | null =>
  typeof r.owner_pid === 'number' && typeof r.owner_host === 'string'
    ? { pid: r.owner_pid, host: r.owner_host, holder: (r.lease_holder as string | null) ?? '' }
    : null;

const toJob = (r: Record<string, unknown>): JobRecord => ({
  id: r.id as string,
  kind: r.kind as string,
  collection: (r.collection as string | null) ?? null,
  state: r.state as JobState,
  attempts: r.attempts as number,
  payload: JSON.parse(r.payload as string) as unknown,
  result: r.result ? (JSON.parse(r.result as string) as unknown) : null,
  error: (r.error as string | null) ?? null,
  createdAt: r.created_at as string,
  startedAt: (r.started_at as string | null) ?? null,
  finishedAt: (r.finished_at as string | null) ?? null,
  owner: ownerOf(r),
});

export function sqliteJobs(db: Db, clock: () => Date = () => new Date()): JobStore {
  const iso = (): string => clock().toISOString();
  const until = (ms: number): string => new Date(clock().getTime() + ms).toISOString();
  // Prepared on first use: a store object over a database still at an older schema (a migration test reads
  // one before migrating it) must not fail on columns its jobs and leases do not have yet.
  let prepared: ReturnType<typeof prepare> | undefined;
  const prepare = () => ({
    insert: db.prepare('INSERT INTO jobs (id, kind, collection, state, payload, created_at) VALUES (?, ?, ?, ?, ?, ?)'),
    start: db.prepare(`UPDATE jobs SET state = 'running', attempts = attempts + 1, started_at = ?, owner_pid = ?, owner_host = ?,
      lease_holder = ?, heartbeat_at = ?, lease_expires_at = ? WHERE id = ?`),
    succeed: db.prepare("UPDATE jobs SET state = 'succeeded', result = ?, error = NULL, finished_at = ? WHERE id = ?"),
    fail: db.prepare("UPDATE jobs SET state = 'failed', error = ?, result = ?, finished_at = ? WHERE id = ?"),
    get: db.prepare('SELECT * FROM jobs WHERE id = ?'),
    activeUpload: db.prepare(`SELECT * FROM jobs WHERE state IN ('queued', 'running') AND kind = 'upload' AND collection = ?
      AND json_extract(payload, '$.contentHash') = ? ORDER BY created_at, rowid LIMIT 1`),
    counts: db.prepare('SELECT state, count(*) AS count FROM jobs GROUP BY state'),
    // json_each binds the list as one parameter, however long it is.
    countsOf: db.prepare('SELECT state, count(*) AS count FROM jobs WHERE collection IN (SELECT value FROM json_each(?)) GROUP BY state'),
    pending: db.prepare(`SELECT count(*) FROM jobs WHERE state IN ('queued', 'running') AND ${QUEUED_KIND}`).pluck(),
    claim: db.prepare(`
      UPDATE jobs SET state = 'running', attempts = attempts + 1, started_at = ?, owner_pid = ?, owner_host = ?,
        lease_holder = ?, heartbeat_at = ?, lease_expires_at = ?
      WHERE id = (SELECT id FROM jobs WHERE state = 'queued' ORDER BY created_at, rowid LIMIT 1) RETURNING id`),
    renew: db.prepare("UPDATE jobs SET heartbeat_at = ?, lease_expires_at = ? WHERE state = 'running' AND lease_holder = ?"),
    running: db.prepare(`SELECT id, attempts, owner_pid, owner_host, lease_holder, lease_expires_at FROM jobs WHERE state = 'running' AND coalesce(${QUEUED_KIND}, 0) = ?`),
    requeue: db.prepare("UPDATE jobs SET state = 'queued' WHERE id = ? AND state = 'running'"),
    abandon: db.prepare("UPDATE jobs SET state = 'failed', error = ?, finished_at = ? WHERE id = ? AND state = 'running'"),
  });
  const st = (): ReturnType<typeof prepare> => (prepared ??= prepare());
  /**
   * Running jobs of the queue (`queued` true) or not that are abandoned: their lease expired, or `isGone` knows
   * their owner is gone (a process of this host that ended) before it would. Rows from before leases have only
   * the latter.
   */
  const abandoned = (queued: boolean, isGone: (o: JobOwner | null) => boolean) => {
    const now = clock().getTime();
    return (st().running.all(queued ? 1 : 0) as Record<string, unknown>[])
      .map((r) => ({ id: r.id as string, attempts: r.attempts as number, owner: ownerOf(r), expires: r.lease_expires_at as string | null }))
      .filter((r) => (r.expires !== null && Date.parse(r.expires) <= now) || isGone(r.owner));
  };

  const jobs: JobStore = {
    create(kind, collection, payload = {}) {
      const id = randomUUID();
      st().insert.run(id, kind, collection, 'queued', JSON.stringify(payload), iso());
      return jobs.get(id)!;
    },
    start(id, owner, leaseMs) {
      const at = iso();
      st().start.run(at, owner.pid, owner.host, owner.holder, at, until(leaseMs), id);
    },
    succeed(id, result) {
      st().succeed.run(JSON.stringify(result), iso(), id);
    },
    fail(id, error, result) {
      st().fail.run(error, result === undefined ? null : JSON.stringify(result), iso(), id);
    },
    get(id) {
      const r = st().get.get(id) as Record<string, unknown> | undefined;
      return r ? toJob(r) : null;
    },
    activeUpload(collection, contentHash) {
      const r = st().activeUpload.get(collection, contentHash) as Record<string, unknown> | undefined;
      return r ? toJob(r) : null;
    },
    counts(collections) {
      const rows = collections === undefined ? st().counts.all() : st().countsOf.all(JSON.stringify(collections));
      return rows as { state: JobState; count: number }[];
    },
    pendingQueued() {
      return st().pending.get() as number;
    },
    claimNext(owner, leaseMs) {
      const at = iso();
      const row = st().claim.get(at, owner.pid, owner.host, owner.holder, at, until(leaseMs)) as { id: string } | undefined;
      return row ? jobs.get(row.id) : null;
    },
    renewLeases(holder, leaseMs) {
      return st().renew.run(iso(), until(leaseMs), holder).changes;
    },
    requeueAbandoned(isGone, maxAttempts) {
      return db
        .transaction(() => {
          let requeued = 0;
          for (const j of abandoned(true, isGone)) {
            if (j.attempts >= maxAttempts) st().abandon.run(`gave up after ${maxAttempts} attempts`, iso(), j.id);
            else requeued += st().requeue.run(j.id).changes;
          }
          return requeued;
        })
        .immediate();
    },
    failAbandoned(isGone, reason) {
      return db
        .transaction(() => {
          let failed = 0;
          for (const j of abandoned(false, isGone)) failed += st().abandon.run(reason(j.owner), iso(), j.id).changes;
          return failed;
        })
        .immediate();
    },
  };
  return jobs;
}
