import { SourceboundError } from './errors.js';

/**
 * Bounded concurrency with a bounded queue. When both are full, `run` fails at once with SB_ERR_BUSY
 * (503 + Retry-After) instead of letting a queue grow without limit under overload.
 */
export interface Limiter {
  run<T>(fn: () => Promise<T>): Promise<T>;
  readonly active: number;
  readonly queued: number;
}

export function createLimiter(concurrency: number, maxQueue: number, what: string): Limiter {
  let active = 0;
  const waiting: (() => void)[] = [];
  const release = (): void => {
    active--;
    const next = waiting.shift();
    if (next) {
      active++;
      next();
    }
  };
  return {
    get active() {
      return active;
    },
    get queued() {
      return waiting.length;
    },
    async run(fn) {
      if (active >= concurrency) {
        if (waiting.length >= maxQueue) throw new SourceboundError('SB_ERR_BUSY', [what]);
        await new Promise<void>((resolve) => waiting.push(resolve));
      } else {
        active++;
      }
      try {
        return await fn();
      } finally {
        release();
      }
    },
  };
}
