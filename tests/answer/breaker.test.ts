import { describe, expect, it } from 'vitest';
import { createCircuitBreaker } from '../../src/answer/breaker.js';

function breakerAt(threshold = 3, coolDownMs = 1000) {
  const clock = { t: 0 };
  const b = createCircuitBreaker({ failureThreshold: threshold, coolDownMs, now: () => clock.t });
  return { b, clock };
}

describe('createCircuitBreaker', () => {
  it('stays closed until the threshold of consecutive failures is reached', () => {
    const { b } = breakerAt(3);
    b.failure();
    b.failure();
    expect(b.state()).toBe('closed');
    expect(b.tryAcquire()).toBe(true);
    b.failure();
    expect(b.state()).toBe('open');
    expect(b.tryAcquire()).toBe(false);
  });

  it('forgets earlier failures after a success', () => {
    const { b } = breakerAt(2);
    b.failure();
    b.success();
    b.failure();
    expect(b.state()).toBe('closed');
  });

  it('admits exactly one trial call once the cool-down has passed', () => {
    const { b, clock } = breakerAt(1, 1000);
    b.failure();
    clock.t = 999;
    expect(b.tryAcquire()).toBe(false);
    clock.t = 1000;
    expect(b.state()).toBe('half_open');
    expect(b.tryAcquire()).toBe(true);
    expect(b.tryAcquire()).toBe(false);
  });

  it('closes after a successful trial and reopens for a full cool-down after a failed one', () => {
    const { b, clock } = breakerAt(1, 1000);
    b.failure();
    clock.t = 1000;
    b.tryAcquire();
    b.failure();
    expect(b.state()).toBe('open');
    clock.t = 1999;
    expect(b.tryAcquire()).toBe(false);
    clock.t = 2000;
    expect(b.tryAcquire()).toBe(true);
    b.success();
    expect(b.state()).toBe('closed');
    expect(b.tryAcquire()).toBe(true);
  });
});
