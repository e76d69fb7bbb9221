// Named leases in PostgreSQL (the re-index lock). Taking one is a single upsert that writes only when the lease
// is free, expired or the caller's already, so of two nodes asking at once exactly one gets it. Times come from
// the database clock.

import type { Lease } from '../types.js';
import type { AsyncLeaseStore } from '../system-of-record.js';
import type { PgPool } from './connect.js';

type Row = Record<string, unknown>;

const toLease = (r: Row): Lease => ({
  name: r.name as string,
  owner: { pid: r.pid as number, host: r.host as string, holder: r.holder as string },
  acquiredAt: r.acquired_at as string,
  heartbeatAt: r.heartbeat_at as string,
  expiresAt: r.expires_at as string,
});

const checkTtl = (ttlMs: number): void => {
  if (!Number.isSafeInteger(ttlMs) || ttlMs < 1) throw new Error(`a lease of ${ttlMs} ms is not a positive whole number of milliseconds`);
};

export function pgLeases(pool: PgPool): AsyncLeaseStore {
  const get = async (name: string): Promise<Lease | null> => {
    const r = await pool.query('SELECT * FROM leases WHERE name = $1', [name]);
    return r.rows[0] ? toLease(r.rows[0] as Row) : null;
  };
  return {
    async acquire(name, owner, ttlMs) {
      checkTtl(ttlMs);
      // A lease released between a refused upsert and the read of its holder is simply asked for again.
      for (let tries = 0; tries < 10; tries++) {
        const r = await pool.query(
          `INSERT INTO leases (name, holder, pid, host, acquired_at, heartbeat_at, expires_at)
           VALUES ($1, $2, $3, $4, now(), now(), now() + $5 * interval '1 millisecond')
           ON CONFLICT (name) DO UPDATE SET holder = excluded.holder, pid = excluded.pid, host = excluded.host,
             -- a holder taking its own lease again keeps its original start
             acquired_at = CASE WHEN leases.holder = excluded.holder THEN leases.acquired_at ELSE excluded.acquired_at END,
             heartbeat_at = excluded.heartbeat_at, expires_at = excluded.expires_at
           WHERE leases.holder = excluded.holder OR leases.expires_at <= now()
           RETURNING *`,
          [name, owner.holder, owner.pid, owner.host, ttlMs],
        );
        if (r.rows[0]) return { acquired: true as const, lease: toLease(r.rows[0] as Row) };
        const held = await get(name);
        if (held) return { acquired: false as const, held };
      }
      throw new Error(`lease "${name}": taken and released ten times while asking for it`);
    },
    async renew(name, holder, ttlMs) {
      checkTtl(ttlMs);
      const r = await pool.query(
        `UPDATE leases SET heartbeat_at = now(), expires_at = now() + $3 * interval '1 millisecond' WHERE name = $1 AND holder = $2`,
        [name, holder, ttlMs],
      );
      return r.rowCount === 1;
    },
    async release(name, holder) {
      await pool.query('DELETE FROM leases WHERE name = $1 AND holder = $2', [name, holder]);
    },
    get,
  };
}
