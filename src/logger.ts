import pino, { type Logger, type DestinationStream } from 'pino';

export type { Logger };

/** "json": one pino object a line, for log collectors; "text": one readable line a record, for people. */
export type LogFormat = 'json' | 'text';

/**
 * The one logger; stages get children with their own bindings. Secrets are redacted wherever they appear.
 * Lines go to `destination`, by default standard error (file descriptor 2, written synchronously, so a
 * worker thread's lines are not lost when the process ends): standard output is for a command's result.
 */
export function createLogger(level: string, destination?: DestinationStream, format: LogFormat = 'json'): Logger {
  const target = destination ?? pino.destination({ dest: 2, sync: true });
  return pino(
    {
      level,
      base: { service: 'sourcebound' },
      redact: {
        paths: [
          'req.headers.authorization',
          'headers.authorization',
          'apiKey',
          '*.apiKey',
          'completion.apiKey',
          'config.completion.apiKey',
        ],
        censor: '[redacted]',
      },
      timestamp: pino.stdTimeFunctions.isoTime,
    },
    format === 'text' ? textLines(target) : target,
  );
}

/**
 * The logger a command or the service uses, as the configuration says. `quiet` lowers the default "info" to
 * "warn" (commands that print their own summary, or JSON a script reads, keep their progress logs out of it).
 */
export function configuredLogger(
  cfg: { logLevel: string; logFormat: LogFormat },
  opts: { destination?: DestinationStream; quiet?: boolean } = {},
): Logger {
  return createLogger(opts.quiet && cfg.logLevel === 'info' ? 'warn' : cfg.logLevel, opts.destination, cfg.logFormat);
}

/** A logger that discards everything, for tests and library use. */
export function silentLogger(): Logger {
  return pino({ level: 'silent' });
}

const LEVELS: Record<number, string> = { 10: 'TRACE', 20: 'DEBUG', 30: 'INFO', 40: 'WARN', 50: 'ERROR', 60: 'FATAL' };
// Said once per process, not on every line.
const OMITTED = new Set(['level', 'time', 'msg', 'service', 'pid', 'hostname']);

/** Rewrites each JSON record pino writes as `time LEVEL message key=value ...` (the stack of an error below it). */
function textLines(target: DestinationStream): DestinationStream {
  return { write: (line: string) => target.write(formatRecord(line)) };
}

export function formatRecord(line: string): string {
  let rec: Record<string, unknown>;
  try {
    rec = JSON.parse(line) as Record<string, unknown>;
  } catch {
    return line;
  }
  const level = typeof rec.level === 'number' ? (LEVELS[rec.level] ?? String(rec.level)) : 'INFO';
  const parts = [String(rec.time ?? ''), level.padEnd(5), String(rec.msg ?? '')];
  let stack = '';
  for (const [k, v] of Object.entries(rec)) {
    if (OMITTED.has(k) || v === undefined) continue;
    if (k === 'err' && v !== null && typeof v === 'object') {
      const e = v as { message?: unknown; stack?: unknown };
      parts.push(`err=${JSON.stringify(String(e.message ?? ''))}`);
      if (typeof e.stack === 'string' && typeof rec.level === 'number' && rec.level >= 50) stack = `\n  ${e.stack.split('\n').join('\n  ')}`;
      continue;
    }
    parts.push(`${k}=${typeof v === 'string' && /^[^\s"=]+$/.test(v) ? v : JSON.stringify(v)}`);
  }
  return `${parts.join(' ')}${stack}\n`;
}
