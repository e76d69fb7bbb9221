import pino, { type Logger, type DestinationStream } from 'pino';

export type { Logger };

/** The one logger; stages get children with their own bindings. Secrets are redacted wherever they appear. */
export function createLogger(level: string, destination?: DestinationStream): Logger {
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
    destination,
  );
}

/** A logger that discards everything, for tests and library use. */
export function silentLogger(): Logger {
  return pino({ level: 'silent' });
}
