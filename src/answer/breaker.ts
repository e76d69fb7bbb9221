// A circuit breaker for the completion endpoint. When the endpoint keeps failing, every
// question would otherwise wait out its timeouts and retries before falling back; after
// `failureThreshold` failures in a row we skip it for `coolDownMs`, then let one trial call
// through (half-open): its success closes the circuit, its failure opens it again.

export type BreakerState = 'closed' | 'open' | 'half_open';

export interface CircuitBreakerOptions {
  /** Consecutive failures that open the circuit (default 5). */
  failureThreshold?: number;
  /** How long an open circuit skips the endpoint before one trial call (default 30 s). */
  coolDownMs?: number;
  /** Milliseconds clock; injected for tests. */
  now?: () => number;
}

export interface CircuitBreaker {
  /** True when a call may go ahead now; in half-open state only the one trial call gets true. */
  tryAcquire(): boolean;
  success(): void;
  failure(): void;
  state(): BreakerState;
}

export function createCircuitBreaker(opts: CircuitBreakerOptions = {}): CircuitBreaker {
  const threshold = Math.max(1, Math.floor(opts.failureThreshold ?? 5));
  const coolDown = Math.max(0, opts.coolDownMs ?? 30_000);
  const now = opts.now ?? Date.now;
  let failures = 0;
  let openedAt: number | null = null;
  let trialInFlight = false;

  const state = (): BreakerState => {
    if (openedAt === null) return 'closed';
    return now() - openedAt >= coolDown ? 'half_open' : 'open';
  };

  return {
    tryAcquire() {
      const s = state();
      if (s === 'closed') return true;
      if (s === 'open' || trialInFlight) return false;
      trialInFlight = true;
      return true;
    },
    success() {
      failures = 0;
      openedAt = null;
      trialInFlight = false;
    },
    failure() {
      if (trialInFlight || openedAt !== null) {
        // The trial failed (or a call admitted before the circuit opened returned after the circuit opened):
        // a fresh cool-down starts now.
        openedAt = now();
        trialInFlight = false;
        return;
      }
      failures++;
      if (failures >= threshold) openedAt = now();
    },
    state,
  };
}
