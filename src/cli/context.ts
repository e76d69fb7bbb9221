// What every command handler is given: the environment (read by src/cli.ts alone), where its output goes,
// and the configuration and logger built the same way for each command.

import { loadConfig, type Config } from '../config/index.js';
import { configuredLogger, type LogFormat, type Logger } from '../logger.js';

export type Env = Record<string, string | undefined>;

/** Standard output carries a command's result; standard error its logs, progress and problems. */
export interface CliIo {
  out(text: string): void;
  err(text: string): void;
  /** Standard error is a terminal (progress bars are drawn only there). */
  errIsTTY: boolean;
  /** Its width in columns; 0 when unknown. */
  errColumns: number;
}

export interface CliContext {
  env: Env;
  io: CliIo;
  /** The configuration, with `--log` (when given) over the configured log format. */
  config(overrides?: Record<string, unknown>): Readonly<Config>;
  /** What the command line sets over the configuration, for commands that load their own. */
  overrides(): Record<string, unknown>;
  /** A logger writing to standard error in the chosen format; `quiet` keeps "info" lines out (see configuredLogger). */
  logger(cfg: Readonly<Config>, quiet?: boolean): Logger;
}

/** The exit codes every command uses; the help and docs/operations.md list them. */
export const EXIT = {
  /** the command did what it was asked */
  ok: 0,
  /** it ran and failed: a document that could not be ingested, a missing database, a broken configuration */
  failed: 1,
  /** it was called wrongly: an unknown command or option, a missing or malformed argument; nothing was done */
  usage: 2,
} as const;

export const EXIT_HELP = `Exit status:
  0  done
  1  the command ran and failed (for ingest and reindex: at least one document failed)
  2  usage error: unknown command or option, missing or malformed argument (nothing was done)`;

/** A problem to report in one line on standard error, ending the command with `exitCode`. */
export class CliError extends Error {
  constructor(
    message: string,
    readonly exitCode: number = EXIT.failed,
  ) {
    super(message);
    this.name = 'CliError';
  }
}

/** The command was called wrongly: exit 2, before any work. */
export function usageError(message: string): CliError {
  return new CliError(message, EXIT.usage);
}

export function createContext(env: Env, io: CliIo, logFormat: () => LogFormat | undefined): CliContext {
  const cli = (): Record<string, unknown> => {
    const format = logFormat();
    return format ? { logFormat: format } : {};
  };
  return {
    env,
    io,
    config: (overrides = {}) => loadConfig({ env, overrides: { ...overrides, ...cli() } }),
    overrides: cli,
    logger: (cfg, quiet = false) => configuredLogger(cfg, { quiet, destination: { write: (line: string) => io.err(line) } }),
  };
}
