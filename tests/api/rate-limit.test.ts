import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { FastifyInstance } from 'fastify';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { sha256Hex } from '../../src/api/auth.js';
import { addressBucket, createRateLimiter } from '../../src/api/rate-limit.js';
import { appDeps, type Runtime } from '../../src/runtime.js';
import { tempRuntime } from '../fixtures/runtime.js';

// Rate limits count failures: a request is taken from its bucket (the key's id when the key is valid,
// the client address when it is missing or wrong) before the key check's result is returned.

describe('the limiter', () => {
  it('allows the budget in a window, refuses the next with the time left, and starts again after the window', () => {
    let t = 1_000;
    const limiter = createRateLimiter({ max: 3, windowMs: 60_000, now: () => t });
    expect([1, 2, 3].map(() => limiter.take('a').allowed)).toEqual([true, true, true]);
    t += 15_000;
    expect(limiter.take('a')).toEqual({ allowed: false, retryAfterMs: 45_000 });
    expect(limiter.take('b').allowed).toBe(true);
    t = 1_000 + 60_000;
    expect(limiter.take('a').allowed).toBe(true);
  });

  it('keeps at most maxBuckets, dropping expired windows first', () => {
    let t = 0;
    const limiter = createRateLimiter({ max: 1, windowMs: 1_000, now: () => t, maxBuckets: 2 });
    limiter.take('old');
    t = 500;
    limiter.take('live');
    expect(limiter.take('live').allowed).toBe(false);
    t = 1_200;
    // "old" has expired: it goes, and "live" keeps its count.
    limiter.take('new');
    expect(limiter.take('live').allowed).toBe(false);
    // Past the bound with nothing expired, the oldest live window goes.
    limiter.take('newer');
    expect(limiter.take('live').allowed).toBe(true);
  });

  it('counts IPv4 per address and IPv6 per /64, however the address is written', () => {
    expect(addressBucket('10.0.0.1')).toBe('ip:10.0.0.1');
    expect(addressBucket('::ffff:10.0.0.1')).toBe('ip:10.0.0.1');
    const a = addressBucket('2001:db8:1:2::1');
    expect(addressBucket('2001:0db8:0001:0002:ffff:ffff:ffff:ffff')).toBe(a);
    expect(addressBucket('2001:db8:1:2:0:0:0:9')).toBe(a);
    expect(addressBucket('2001:db8:1:3::1')).not.toBe(a);
    expect(addressBucket('::1')).toBe('ip6:0:0:0:0::/64');
    expect(addressBucket('1::2:3:4:5:1.2.3.4')).toBe('ip6:1:0:2:3::/64');
  });
});

const KEY = 'sbk_rate-test-reader';
const OTHER_KEY = 'sbk_rate-test-second-reader';

let rt: Runtime;
let app: FastifyInstance;
let cleanup: () => void;
let folder: string;
let clock = 1_000_000;
let budget = 0;

beforeAll(async () => {
  folder = mkdtempSync(path.join(tmpdir(), 'sb-rate-'));
  writeFileSync(path.join(folder, 'lost-property.md'), '# Lost property\n\nFound items are kept for 30 days.\n');
  // The default budget, so "after the configured budget" means the shipped configuration.
  const made = await tempRuntime({
    auth: {
      required: true,
      keys: [
        { id: 'reader', sha256: sha256Hex(KEY), scopes: ['query'], collections: ['*'] },
        { id: 'second', sha256: sha256Hex(OTHER_KEY), scopes: ['query'], collections: ['*'] },
      ],
    },
  });
  ({ rt, cleanup } = made);
  budget = made.config.limits.rateLimitPerMinute;
  await rt.ingestor.ingestPath(folder, { collection: 'default' });
  // The limiter's windows follow this clock, so no test depends on how fast requests go out.
  app = buildApp(made.config, { ...appDeps(rt, () => true), now: () => clock });
  await app.ready();
});
afterAll(async () => {
  await app?.close();
  cleanup?.();
  rmSync(folder, { recursive: true, force: true });
});

const tally = async (n: number, send: (i: number) => Promise<{ statusCode: number }>): Promise<number[]> => {
  const out: number[] = [];
  for (let i = 0; i < n; i++) out.push((await send(i)).statusCode);
  return out;
};

describe('rate limits that count failures', () => {
  it('answers a wrong key 401 up to the configured budget and 429 after it, per client address', async () => {
    expect(budget).toBe(600);
    const from = '10.1.0.1';
    const wrong = () => app.inject({ method: 'POST', url: '/%761/search', headers: { authorization: 'Bearer sbk_guess' }, payload: { query: 'refund' }, remoteAddress: from });
    const statuses = await tally(budget + 100, wrong);
    expect(statuses.slice(0, budget).every((s) => s === 401)).toBe(true);
    expect(statuses.slice(budget).every((s) => s === 429)).toBe(true);
    const last = await wrong();
    expect(last.json().error.code).toBe('SB_ERR_RATE_LIMITED');
    expect(Number(last.headers['retry-after'])).toBeGreaterThan(0);
    // A missing key spends the same address's budget.
    expect((await app.inject({ url: '/v1/collections', remoteAddress: from })).statusCode).toBe(429);
    // Another address has its own budget; a valid key from the throttled address is counted by its key.
    expect((await app.inject({ url: '/v1/collections', headers: { authorization: 'Bearer sbk_guess' }, remoteAddress: '10.1.0.2' })).statusCode).toBe(401);
    expect((await app.inject({ url: '/v1/collections', headers: { authorization: `Bearer ${KEY}` }, remoteAddress: from })).statusCode).toBe(200);
    // Health checks and the desk page are never limited.
    expect((await app.inject({ url: '/health', remoteAddress: from })).statusCode).toBe(200);
    clock += 60_000;
    expect((await wrong()).statusCode).toBe(401);
  });

  it('counts a valid key by its id, whatever address it comes from', async () => {
    const statuses = await tally(budget + 1, (i) =>
      app.inject({ url: '/v1/collections', headers: { authorization: `Bearer ${OTHER_KEY}` }, remoteAddress: `10.2.${i % 200}.1` }),
    );
    expect(statuses.filter((s) => s === 200)).toHaveLength(budget);
    expect(statuses[budget]).toBe(429);
  });

  it('counts signed-link requests and unknown routes by address too', async () => {
    const from = '10.3.0.1';
    const statuses = await tally(budget + 2, (i) => app.inject({ url: i % 2 === 0 ? '/originals?link=forged.x' : '/no/such/route', remoteAddress: from }));
    expect(statuses.slice(0, budget)).toEqual(Array.from({ length: budget }, (_, i) => (i % 2 === 0 ? 403 : 404)));
    expect(statuses.slice(budget)).toEqual([429, 429]);
  });
});
