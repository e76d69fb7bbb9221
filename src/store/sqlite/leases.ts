// Named leases in SQLite (the re-index lock): one holder at a time, renewed by its heartbeat, taken over by
// anyone once it has expired. Taking one is a single IMMEDIATE transaction, so two processes never both win.

import type { JobOwner, Lease, LeaseStore } from '../types.js';
import type { Db } from './db.js';

const toLease = (r: Record<string, unknown>): Lease => ({
  name: r.name as string,
  owner: { pid: r.pid as number, host: r.host as string, holder: r.holder as string },
  acquiredAt: r.acquired_at as string,
  heartbeatAt: r.heartbeat_at as string,
  expiresAt: r.expires_at as string,
});

export function sqliteLeases(db: Db, clock: () => Date = () => new Date()): LeaseStore {
  // Prepared on first use: a store object over a database still at an older schema (a migration test reads
  // one before migrating it) must not fail on columns its jobs and leases do not have yet.
  let prepared: ReturnType<typeof prepare> | undefined;
  const prepare = () => ({
    get: db.prepare('SELECT * FROM leases WHERE name = ?'),
    put: db.prepare(`
      INSERT INTO leases (name, holder, pid, host, acquired_at, heartbeat_at, expires_at) VALUES (?, ?, ?, ?, ?, ?, ?)
      ON CONFLICT (name) DO UPDATE SET holder = excluded.holder, pid = excluded.pid, host = excluded.host,
        acquired_at = excluded.acquired_at, heartbeat_at = excluded.heartbeat_at, expires_at = excluded.expires_at`),
    renew: db.prepare('UPDATE leases SET heartbeat_at = ?, expires_at = ? WHERE name = ? AND holder = ?'),
    release: db.prepare('DELETE FROM leases WHERE name = ? AND holder = ?'),
  });
  const st = (): ReturnType<typeof prepare> => (prepared ??= prepare());
  const get = (name: string): Lease | null => {
    const r = st().get.get(name) as Record<string, unknown> | undefined;
    return r ? toLease(r) : null;
  };
  const acquireTx = db.transaction((name: string, owner: JobOwner, ttlMs: number, isGone: (o: JobOwner) => boolean) => {
    const now = clock();
    const held = get(name);
    if (held && held.owner.holder !== owner.holder && Date.parse(held.expiresAt) > now.getTime() && !isGone(held.owner)) {
      return { acquired: false as const, held };
    }
    const at = now.toISOString();
    // A holder taking its own lease again keeps its original start.
    const since = held && held.owner.holder === owner.holder ? held.acquiredAt : at;
    st().put.run(name, owner.holder, owner.pid, owner.host, since, at, new Date(now.getTime() + ttlMs).toISOString());
    return { acquired: true as const, lease: get(name)! };
  });
  return {
    acquire: (name, owner, ttlMs, isGone = () => false) => acquireTx.immediate(name, owner, ttlMs, isGone),
    renew(name, holder, ttlMs) {
      const now = clock();
      return st().renew.run(now.toISOString(), new Date(now.getTime() + ttlMs).toISOString(), name, holder).changes > 0;
    },
    release(name, holder) {
      st().release.run(name, holder);
    },
    get,
  };
}
