import { describe, expect, it } from 'vitest';
import { createLogger } from '../src/logger.js';

function lines(format: 'text' | 'json', level = 'debug') {
  const out: string[] = [];
  const logger = createLogger(level, { write: (s: string) => void out.push(s) }, format);
  return { logger, out };
}

describe('the text log format', () => {
  it('writes one line a record: time, level, message, then the fields', () => {
    const { logger, out } = lines('text');
    logger.child({ collection: 'trams' }).warn({ vectors: 125, reason: 'two words', nested: { a: 1 } }, 'index rebuilt');
    expect(out).toHaveLength(1);
    expect(out[0]).toMatch(/^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{3}Z WARN  index rebuilt collection=trams vectors=125 reason="two words" nested=\{"a":1\}\n$/);
  });

  it('keeps redaction: a secret is never written, in either format', () => {
    for (const format of ['text', 'json'] as const) {
      const { logger, out } = lines(format);
      logger.info({ completion: { apiKey: 'sk-never-shown' } }, 'configured');
      expect(out.join('')).not.toContain('sk-never-shown');
      expect(out.join('')).toContain('[redacted]');
    }
  });

  it('names an error by its message, with its stack below only at error level and above', () => {
    const { logger, out } = lines('text');
    logger.warn({ err: new Error('disk full') }, 'retrying');
    logger.error({ err: new Error('disk full') }, 'gave up');
    expect(out[0]).toMatch(/WARN  retrying err="disk full"\n$/);
    expect(out[1]!.split('\n')[0]).toMatch(/ERROR gave up err="disk full"$/);
    expect(out[1]).toMatch(/\n {2}Error: disk full\n {3,}at /);
  });

  it('leaves the JSON format as pino writes it', () => {
    const { logger, out } = lines('json');
    logger.info({ n: 1 }, 'hello');
    expect(JSON.parse(out[0]!)).toMatchObject({ level: 30, msg: 'hello', n: 1, service: 'sourcebound' });
  });
});
