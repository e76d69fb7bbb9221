// Every command and sub-command answers --help with its usage (exit 0), and a bad option with a
// one-line message (exit 2), never a stack trace and never by starting the work.
import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import { main } from '../../src/cli.js';

let out = '';
let err = '';
beforeEach(() => {
  out = '';
  err = '';
  vi.spyOn(process.stdout, 'write').mockImplementation((s: string | Uint8Array) => ((out += String(s)), true));
  vi.spyOn(process.stderr, 'write').mockImplementation((s: string | Uint8Array) => ((err += String(s)), true));
});
afterEach(() => vi.restoreAllMocks());

describe('command help', () => {
  it.each([['eval', 'answers'], ['eval', 'retrieval'], ['eval', 'fit']])('prints the options of %s %s', async (a, b) => {
    expect(await main([a, b, '--help'], {})).toBe(0);
    expect(out).toMatch(new RegExp(`Usage: sourcebound ${a} ${b}`));
    expect(out).toMatch(/--help/);
    expect(err).toBe('');
  });

  it.each(['serve', 'ingest', 'reindex', 'model', 'key', 'backup', 'feedback', 'config'])('prints usage for %s --help instead of running it', async (cmd) => {
    expect(await main([cmd, '--help'], { SOURCEBOUND_DATA_DIR: '/nonexistent/never-created' })).toBe(0);
    expect(out).toMatch(new RegExp(`sourcebound ${cmd}`));
  });

  it('answers an unknown option with one line naming it, not a stack trace', async () => {
    expect(await main(['eval', 'answers', '--questions', 'q.jsonl', '--bogus'], {})).toBe(2);
    expect(err).toMatch(/--bogus/);
    expect(err).not.toMatch(/\n\s+at /);
    expect(err.trim().split('\n').length).toBeLessThanOrEqual(2);
  });

  it('says which file is missing', async () => {
    expect(await main(['eval', 'answers', '--questions', '/nonexistent/q.jsonl'], {})).toBe(2);
    expect(err).toMatch(/no question file at \/nonexistent\/q.jsonl/);
  });

  it('lists eval answers and eval fit in the top-level help', async () => {
    expect(await main(['--help'], {})).toBe(0);
    expect(out).toMatch(/eval answers/);
    expect(out).toMatch(/eval fit/);
  });
});
