#!/usr/bin/env node
// The one entry point. Only this file reads process.env, argv and the process's streams; the command
// tree is src/cli/program.ts. A result goes to standard output; logs, progress and problems to standard
// error; a problem is one line, and the exit status says what happened (EXIT in src/cli/context.ts).

import { realpathSync } from 'node:fs';
import { CliError, createContext, EXIT, type CliIo, type Env } from './cli/context.js';
import { buildProgram, commandPath, isCommanderError } from './cli/program.js';
import { SourceboundError } from './errors.js';
import type { LogFormat } from './logger.js';

const processIo: CliIo = {
  out: (text) => void process.stdout.write(text),
  err: (text) => void process.stderr.write(text),
  errIsTTY: Boolean(process.stderr.isTTY),
  // Read at each use: a terminal can be resized while a command runs.
  get errColumns() {
    return process.stderr.columns ?? 0;
  },
};

export async function main(argv: string[], env: Env, io: CliIo = processIo): Promise<number> {
  let format: LogFormat | undefined;
  const ctx = createContext(env, io, () => format);
  const program = buildProgram(ctx);
  program.root.hook('preAction', (root) => {
    format = root.opts<{ log?: LogFormat }>().log;
  });
  // No command at all: the overview, on standard error since nothing was done.
  if (argv.length === 0) {
    program.root.outputHelp({ error: true });
    return EXIT.usage;
  }
  let running = 'sourcebound';
  program.root.hook('preAction', (_root, action) => {
    running = `sourcebound ${commandPath(action)}`;
  });
  try {
    await program.root.parseAsync(argv, { from: 'user' });
    return program.exitCode();
  } catch (err) {
    if (isCommanderError(err)) {
      // --help, `help` and --version end here too, with the library's exit code 0.
      if (err.exitCode === 0) return EXIT.ok;
      const refused = program.refused();
      if (!refused) return EXIT.usage; // a command with sub-commands called without one: its help is on standard error
      const where = `sourcebound ${commandPath(refused.command)}`.trim();
      io.err(`${where}: ${refused.message.trim().replace(/^error: /, '').replace(/\s*\n\s*/g, ' ')} (see \`${where} --help\`)\n`);
      return EXIT.usage;
    }
    if (err instanceof CliError || err instanceof SourceboundError) {
      io.err(`${running}: ${err.message}\n`);
      return err instanceof CliError ? err.exitCode : EXIT.failed;
    }
    // An unexpected failure: one line; the stack only when asked for (SOURCEBOUND_LOG_LEVEL=debug).
    const e = err as Error;
    const detail = env.SOURCEBOUND_LOG_LEVEL === 'debug' || env.SOURCEBOUND_LOG_LEVEL === 'trace' ? `\n${e?.stack ?? ''}` : '';
    io.err(`${running}: ${e?.message ?? String(err)}${detail}\n`);
    return EXIT.failed;
  }
}

// Run when executed directly (bin or `node dist/cli.js`), not when imported by tests.
const invokedDirectly = (() => {
  const entry = process.argv[1];
  if (!entry) return false;
  try {
    // npm's bin shim is a symlink: compare real paths.
    return import.meta.url === new URL(`file://${realpathSync(entry)}`).href;
  } catch {
    return false;
  }
})();

if (invokedDirectly) {
  void main(process.argv.slice(2), process.env).then((code) => {
    process.exitCode = code;
  });
}
