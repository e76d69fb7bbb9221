// The eval commands' own refusals. Every command's --help and unknown-option behaviour is checked by
// walking the command tree in tests/cli.test.ts.
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

  it('names every missing required option at once', async () => {
    expect(await main(['eval', 'retrieval', '--json'], {})).toBe(2);
    expect(err).toBe('sourcebound eval retrieval: missing --corpus, --queries, --qrels\n');
  });

  it('refuses a model file that is not a fitted model before reading any question', async () => {
    expect(await main(['eval', 'answers', '--questions', '/nonexistent/q.jsonl', '--model', '/nonexistent/model.json'], {})).toBe(2);
    expect(err).toMatch(/^sourcebound eval answers: /);
    expect(err).not.toMatch(/no question file/);
  });
});
