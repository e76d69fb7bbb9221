import { describe, expect, it } from 'vitest';
import { createLimiter } from '../src/limiter.js';

const deferred = () => {
  let resolve!: () => void;
  const promise = new Promise<void>((r) => (resolve = r));
  return { promise, resolve };
};

describe('the concurrency limiter', () => {
  it('runs at most `concurrency` tasks at once and queues the next ones', async () => {
    const lim = createLimiter(2, 2, 'test');
    const gates = [deferred(), deferred(), deferred()];
    let running = 0;
    let peak = 0;
    const tasks = gates.map((g) =>
      lim.run(async () => {
        running++;
        peak = Math.max(peak, running);
        await g.promise;
        running--;
      }),
    );
    await Promise.resolve();
    expect(lim.active).toBe(2);
    expect(lim.queued).toBe(1);
    gates.forEach((g) => g.resolve());
    await Promise.all(tasks);
    expect(peak).toBe(2);
    expect(lim.active).toBe(0);
  });

  it('fails at once with SB_ERR_BUSY when the queue is full, instead of growing it', async () => {
    const lim = createLimiter(1, 1, 'query embeddings');
    const gate = deferred();
    const a = lim.run(() => gate.promise);
    const b = lim.run(async () => 'second');
    await expect(lim.run(async () => 'third')).rejects.toMatchObject({ code: 'SB_ERR_BUSY', status: 503 });
    gate.resolve();
    await a;
    expect(await b).toBe('second');
  });

  it('releases the slot when a task throws', async () => {
    const lim = createLimiter(1, 0, 'test');
    await expect(lim.run(async () => Promise.reject(new Error('boom')))).rejects.toThrow('boom');
    expect(await lim.run(async () => 'ok')).toBe('ok');
  });
});
