import { isIP } from 'node:net';

// Requests per window per bucket (an API key's id, or a client address when the key is missing or
// wrong). The access hook takes from the bucket before it reports the key check's result, so failed
// requests are counted like any other and key guessing is throttled too.

export type RateDecision = { allowed: true } | { allowed: false; retryAfterMs: number };

export interface RateLimiter {
  take(bucket: string): RateDecision;
}

export function createRateLimiter(opts: {
  max: number;
  windowMs: number;
  now: () => number;
  /** Buckets kept at most; past it the oldest are dropped, expired ones first (default 100,000). */
  maxBuckets?: number;
}): RateLimiter {
  const { max, windowMs, now } = opts;
  const maxBuckets = opts.maxBuckets ?? 100_000;
  // A fixed window per bucket that starts at its first request. The Map keeps insertion order and a
  // bucket is re-inserted when its window restarts, so the first entries are always the oldest windows:
  // pruning from the front drops expired buckets first and costs nothing per request on average.
  const windows = new Map<string, { start: number; count: number }>();

  const prune = (t: number): void => {
    for (const [bucket, w] of windows) {
      if (windows.size <= maxBuckets) return;
      // Still over after the expired ones: drop the oldest live window too, which forgives that bucket
      // early. Only a client holding more than maxBuckets addresses at once can cause that, and memory
      // must stay bounded whatever clients send.
      if (t - w.start >= windowMs || windows.size > maxBuckets) windows.delete(bucket);
    }
  };

  return {
    take(bucket) {
      const t = now();
      let w = windows.get(bucket);
      if (!w || t - w.start >= windowMs) {
        windows.delete(bucket);
        w = { start: t, count: 0 };
        windows.set(bucket, w);
        if (windows.size > maxBuckets) prune(t);
      }
      w.count++;
      if (w.count > max) return { allowed: false, retryAfterMs: Math.max(1, w.start + windowMs - t) };
      return { allowed: true };
    },
  };
}

/**
 * The bucket of a client address. One IPv6 host usually holds a whole /64, so IPv6 addresses count per
 * /64 prefix; otherwise a single client could spread its requests over more addresses than any budget.
 */
export function addressBucket(ip: string): string {
  const mapped = /^::ffff:(\d+\.\d+\.\d+\.\d+)$/i.exec(ip);
  if (mapped) return `ip:${mapped[1]}`;
  if (isIP(ip) !== 6) return `ip:${ip}`;
  const [head = '', tail] = ip.split('%')[0]!.split('::') as [string, string | undefined];
  const groupsOf = (part: string): string[] =>
    part === ''
      ? []
      : part.split(':').flatMap((g) => {
          // An embedded IPv4 tail (::1.2.3.4) is two groups.
          if (!g.includes('.')) return [g];
          const [a = 0, b = 0, c = 0, d = 0] = g.split('.').map(Number);
          return [((a << 8) | b).toString(16), ((c << 8) | d).toString(16)];
        });
  const left = groupsOf(head);
  const right = groupsOf(tail ?? '');
  const fill = tail === undefined ? [] : new Array<string>(Math.max(0, 8 - left.length - right.length)).fill('0');
  const groups = [...left, ...fill, ...right].slice(0, 4).map((g) => Number.parseInt(g, 16).toString(16));
  return `ip6:${groups.join(':')}::/64`;
}
