import { describe, expect, it } from 'vitest';
import { pgSuiteMode, probePg } from '../../fixtures/pg.js';

// The PostgreSQL suites skip on a machine without the server, and fail under CI=true instead of skipping.
describe('when the PostgreSQL suites run', () => {
  it('runs them when the server answers, whatever CI says', () => {
    expect(pgSuiteMode(null, {})).toBe('run');
    expect(pgSuiteMode(null, { CI: 'true' })).toBe('run');
  });

  it('skips them on an unreachable server outside CI, and fails them under CI=true', () => {
    expect(pgSuiteMode('connect ECONNREFUSED', {})).toBe('skip');
    expect(pgSuiteMode('connect ECONNREFUSED', { CI: 'false' })).toBe('skip');
    expect(pgSuiteMode('connect ECONNREFUSED', { CI: 'true' })).toBe('fail');
  });

  it('reports a server that does not listen as unreachable, with the reason', async () => {
    // Port 1 (tcpmux) has no listener on a test machine: the connection is refused at once.
    const reason = await probePg('postgres://postgres@127.0.0.1:1/postgres');
    expect(reason).toMatch(/ECONNREFUSED|connect/i);
  });
});
