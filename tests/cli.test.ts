// The command line as an operator meets it. The tests walk the command tree the library holds, so a
// command added later is covered without editing this file: every command answers --help (exit 0) and an
// unknown option with exactly one line on standard error (exit 2), before doing any work.
import { existsSync, mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { main } from '../src/cli.js';
import { createContext, EXIT, type CliIo } from '../src/cli/context.js';
import { allCommands, buildProgram, commandPath } from '../src/cli/program.js';

interface Captured extends CliIo {
  stdout: string;
  stderr: string;
}

function capture(): Captured {
  const c: Captured = {
    stdout: '',
    stderr: '',
    out: (s) => void (c.stdout += s),
    err: (s) => void (c.stderr += s),
    errIsTTY: false,
    errColumns: 0,
  };
  return c;
}

let work: string;
let env: Record<string, string>;
beforeAll(() => {
  work = mkdtempSync(path.join(tmpdir(), 'sb-cli-'));
  // A data folder that no command may create: a refused command line does nothing.
  env = { SOURCEBOUND_DATA_DIR: path.join(work, 'never-created'), SOURCEBOUND_EMBEDDER: 'hashing' };
});
afterAll(() => rmSync(work, { recursive: true, force: true }));

const io = capture();
const tree = allCommands(buildProgram(createContext({}, io, () => undefined)).root);
const paths = tree.map((c) => commandPath(c)).map((p) => (p === '' ? [] : p.split(' ')));

describe('every command of the tree', () => {
  it('holds the commands the docs list, eval answers and eval fit among them', () => {
    const names = paths.map((p) => p.join(' '));
    for (const expected of ['serve', 'ingest', 'reindex', 'eval retrieval', 'eval answers', 'eval fit', 'model pull', 'model status', 'key new', 'feedback export', 'backup', 'config']) {
      expect(names).toContain(expected);
    }
  });

  it.each(paths.map((p) => [p.join(' ') || '(the program)', p] as const))('%s answers --help with its usage on standard output, exit 0', async (_name, p) => {
    const c = capture();
    expect(await main([...p, '--help'], env, c)).toBe(EXIT.ok);
    expect(c.stdout).toContain(`Usage: ${['sourcebound', ...p].join(' ')}`);
    expect(c.stdout).toContain('Exit status:');
    expect(c.stderr).toBe('');
    expect(existsSync(env.SOURCEBOUND_DATA_DIR!)).toBe(false);
  });

  it.each(paths.map((p) => [p.join(' ') || '(the program)', p] as const))('%s refuses an unknown option in one line naming it, exit 2', async (_name, p) => {
    const c = capture();
    expect(await main([...p, '--no-such-option'], env, c)).toBe(EXIT.usage);
    const lines = c.stderr.split('\n').filter(Boolean);
    expect(lines, c.stderr).toHaveLength(1);
    expect(lines[0]).toMatch(new RegExp(`^${['sourcebound', ...p].join(' ')}: unknown option '--no-such-option'`));
    expect(c.stdout).toBe('');
    expect(existsSync(env.SOURCEBOUND_DATA_DIR!)).toBe(false);
  });
});

describe('the program', () => {
  it('lists every command with its full path in the top-level help', async () => {
    const c = capture();
    expect(await main(['--help'], env, c)).toBe(EXIT.ok);
    const leaves = paths.filter((p, i) => p.length > 0 && tree[i]!.commands.length === 0);
    for (const p of leaves) expect(c.stdout).toMatch(new RegExp(`^  ${p.join(' ')} `, 'm'));
    expect(c.stdout).toMatch(/^ {2}eval answers --questions F/m);
    expect(c.stdout).toMatch(/^ {2}eval fit --features F/m);
  });

  it('answers no command with the overview on standard error, exit 2', async () => {
    const c = capture();
    expect(await main([], env, c)).toBe(EXIT.usage);
    expect(c.stderr).toContain('Usage: sourcebound');
    expect(c.stdout).toBe('');
  });

  it('refuses an unknown command, a malformed value and a missing argument in one line each, exit 2', async () => {
    for (const [argv, said] of [
      [['publish'], /^sourcebound: unknown command 'publish'/],
      [['eval', 'retrieval', '--corpus', 'c', '--queries', 'q', '--qrels', 'r', '--k', '0'], /--k <n>.*'0' is invalid.*from 1 to 10000/],
      [['eval', 'retrieval', '--mode', 'fuzzy'], /--mode <mode>.*'fuzzy' is invalid/],
      [['eval', 'retrieval', '--queries', 'q'], /^sourcebound eval retrieval: missing --corpus, --qrels$/],
      [['ingest'], /^sourcebound ingest: missing required argument 'path'/],
      [['backup', 'a.db', 'b.db'], /^sourcebound backup: too many arguments/],
      [['key', 'new', '--scopes', 'query,owner'], /^sourcebound key new: unknown scope owner; use query, ingest, admin$/],
      [['--log', 'yaml', 'config'], /^sourcebound: option '--log <format>' argument 'yaml' is invalid/],
      // One rule for collection names, the API's (src/api/schemas.ts).
      [['ingest', 'docs', '--collection', 'bad name!'], /^sourcebound ingest: option '-c, --collection <name>' argument 'bad name!' is invalid.*letters, digits/],
      [['reindex', '--collection', '-x'], /^sourcebound reindex: option '-c, --collection <name>' argument '-x' is invalid/],
    ] as const) {
      const c = capture();
      expect(await main([...argv], env, c), argv.join(' ')).toBe(EXIT.usage);
      expect(c.stderr.split('\n').filter(Boolean), c.stderr).toHaveLength(1);
      expect(c.stderr.trim()).toMatch(said);
      expect(c.stdout).toBe('');
    }
    expect(existsSync(env.SOURCEBOUND_DATA_DIR!)).toBe(false);
  });

  it('reports a command that ran and failed in one line, exit 1', async () => {
    const c = capture();
    expect(await main(['backup', path.join(work, 'copy.db')], env, c)).toBe(EXIT.failed);
    expect(c.stderr).toBe(`sourcebound backup: no database at ${path.join(env.SOURCEBOUND_DATA_DIR!, 'sourcebound.db')}\n`);
  });
});

describe('logs', () => {
  let docs: string;
  beforeAll(() => {
    docs = path.join(work, 'docs');
    mkdirSync(docs);
    writeFileSync(path.join(docs, 'fares.md'), '# Fares\n\nA single tram fare is 2.40 and a day pass is 6.00.\n');
  });

  it('go to standard error as text by default, and the result alone to standard output', async () => {
    const c = capture();
    const e = { ...env, SOURCEBOUND_DATA_DIR: path.join(work, 'text'), SOURCEBOUND_LOG_LEVEL: 'debug' };
    expect(await main(['ingest', docs, '--collection', 'c'], e, c)).toBe(EXIT.ok);
    expect(c.stdout).toMatch(/^documents: 1 added/);
    expect(c.stdout).not.toContain('{');
    const logs = c.stderr.split('\n').filter((l) => /^\d{4}-\d\d-\d\dT/.test(l));
    expect(logs.length).toBeGreaterThan(0);
    expect(logs.every((l) => / (DEBUG|INFO |WARN |ERROR) /.test(l)), c.stderr).toBe(true);
    expect(c.stderr).not.toMatch(/^\{/m);
  });

  it('are one JSON object a line with --log json (or logFormat "json"), and --json keeps standard output one object', async () => {
    for (const [argv, extra] of [
      [['--log', 'json'], {}],
      [[], { SOURCEBOUND_LOG_FORMAT: 'json' }],
    ] as const) {
      const c = capture();
      const e = { ...env, ...extra, SOURCEBOUND_DATA_DIR: mkdtempSync(path.join(work, 'json-')), SOURCEBOUND_LOG_LEVEL: 'debug' };
      expect(await main([...argv, 'ingest', docs, '--collection', 'c', '--json'], e, c)).toBe(EXIT.ok);
      expect(JSON.parse(c.stdout)).toMatchObject({ documents: { added: 1, failed: 0 } });
      const lines = c.stderr.split('\n').filter(Boolean);
      expect(lines.length).toBeGreaterThan(0);
      for (const l of lines) expect((JSON.parse(l) as { service: string }).service).toBe('sourcebound');
    }
  });
});
