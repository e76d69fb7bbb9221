import { randomUUID } from 'node:crypto';
import type { Db } from './db.js';

export type JobState = 'queued' | 'running' | 'succeeded' | 'failed';

export interface JobRecord {
  id: string;
  kind: string;
  collection: string | null;
  state: JobState;
  attempts: number;
  payload: unknown;
  result: unknown;
  error: string | null;
  createdAt: string;
  startedAt: string | null;
  finishedAt: string | null;
}

export interface Jobs {
  create(kind: string, collection: string | null, payload?: unknown): JobRecord;
  start(id: string): void;
  succeed(id: string, result: unknown): void;
  fail(id: string, error: string, result?: unknown): void;
  get(id: string): JobRecord | null;
  /** Number of jobs in each state. */
  /** Jobs by state; only those of these collections when given (jobs of no single collection are then left out). */
  counts(collections?: readonly string[]): { state: JobState; count: number }[];
  /** Jobs left `running` by a process that died are marked failed so they can be retried. */
  failAbandoned(reason: string): number;
}

export function createJobs(db: Db, clock: () => Date = () => new Date()): Jobs {
  const iso = (): string => clock().toISOString();
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
  });
  return {
    create(kind, collection, payload = {}) {
      const id = randomUUID();
      db.prepare(
        'INSERT INTO jobs (id, kind, collection, state, payload, created_at) VALUES (?, ?, ?, ?, ?, ?)',
      ).run(id, kind, collection, 'queued', JSON.stringify(payload), iso());
      return this.get(id)!;
    },
    start(id) {
      db.prepare("UPDATE jobs SET state = 'running', attempts = attempts + 1, started_at = ? WHERE id = ?").run(iso(), id);
    },
    succeed(id, result) {
      db.prepare("UPDATE jobs SET state = 'succeeded', result = ?, error = NULL, finished_at = ? WHERE id = ?").run(
        JSON.stringify(result),
        iso(),
        id,
      );
    },
    fail(id, error, result) {
      db.prepare("UPDATE jobs SET state = 'failed', error = ?, result = ?, finished_at = ? WHERE id = ?").run(
        error,
        result === undefined ? null : JSON.stringify(result),
        iso(),
        id,
      );
    },
    get(id) {
      const r = db.prepare('SELECT * FROM jobs WHERE id = ?').get(id) as Record<string, unknown> | undefined;
      return r ? toJob(r) : null;
    },
    counts(collections) {
      if (collections === undefined) {
        return db.prepare('SELECT state, count(*) AS count FROM jobs GROUP BY state').all() as { state: JobState; count: number }[];
      }
      // json_each binds the list as one parameter, however long it is.
      return db
        .prepare('SELECT state, count(*) AS count FROM jobs WHERE collection IN (SELECT value FROM json_each(?)) GROUP BY state')
        .all(JSON.stringify(collections)) as { state: JobState; count: number }[];
    },
    failAbandoned(reason) {
      return db
        .prepare("UPDATE jobs SET state = 'failed', error = ?, finished_at = ? WHERE state = 'running'")
        .run(reason, iso()).changes;
    },
  };
}
