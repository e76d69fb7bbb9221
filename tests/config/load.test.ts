import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { configSchema, loadConfig, PACKAGE_ROOT, redactConfig } from '../../src/config/index.js';
import { SourceboundError } from '../../src/errors.js';

describe('configuration', () => {
  it('keeps config/default.json equal to the schema defaults', () => {
    const file = JSON.parse(readFileSync(path.join(PACKAGE_ROOT, 'config', 'default.json'), 'utf8'));
    expect(file).toEqual(configSchema.parse({}));
  });

  it('applies PORT, HOST and SOURCEBOUND_DATA_DIR over the defaults', () => {
    const c = loadConfig({ env: { PORT: '9123', HOST: '0.0.0.0', SOURCEBOUND_DATA_DIR: '/tmp/x' } });
    expect(c.server.port).toBe(9123);
    expect(c.server.host).toBe('0.0.0.0');
    expect(c.dataDir).toBe('/tmp/x');
  });

  it('defaults to port 8080 on 127.0.0.1 with data under ./data', () => {
    const c = loadConfig({ env: {}, cwd: '/srv/app' });
    expect(c.server).toMatchObject({ port: 8080, host: '127.0.0.1' });
    expect(c.dataDir).toBe('/srv/app/data');
  });

  it('reads the file named by SOURCEBOUND_CONFIG, and the environment wins over it', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-cfg-'));
    const f = path.join(dir, 'prod.json');
    writeFileSync(f, JSON.stringify({ server: { port: 7000 }, retrieval: { k: 12 } }));
    const c = loadConfig({ env: { SOURCEBOUND_CONFIG: f } });
    expect(c.server.port).toBe(7000);
    expect(c.retrieval.k).toBe(12);
    expect(loadConfig({ env: { SOURCEBOUND_CONFIG: f, PORT: '7001' } }).server.port).toBe(7001);
  });

  it('lists every problem at once, each naming its key', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-cfg-'));
    const f = path.join(dir, 'bad.json');
    writeFileSync(f, JSON.stringify({ server: { port: 'eighty' }, retrival: {}, answer: { minSupport: 3 } }));
    let err: unknown;
    try {
      loadConfig({ env: { SOURCEBOUND_CONFIG: f } });
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(SourceboundError);
    const e = err as SourceboundError;
    expect(e.code).toBe('SB_ERR_CONFIG_INVALID');
    expect(e.message).toContain('server.port');
    expect(e.message).toContain('"retrival"');
    expect(e.message).toContain('answer.minSupport');
  });

  it('refuses a non-numeric PORT naming the variable', () => {
    expect(() => loadConfig({ env: { PORT: 'abc' } })).toThrow(/PORT/);
  });

  it('refuses a config file that is not JSON, naming the file', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-cfg-'));
    const f = path.join(dir, 'broken.json');
    writeFileSync(f, '{ nope');
    expect(() => loadConfig({ env: { SOURCEBOUND_CONFIG: f } })).toThrow(/broken\.json/);
  });

  it('redacts the completion API key when printed', () => {
    const c = loadConfig({ env: { SOURCEBOUND_COMPLETION_API_KEY: 'sk-very-secret' } });
    expect(c.completion.apiKey).toBe('sk-very-secret');
    const printed = JSON.stringify(redactConfig(c));
    expect(printed).not.toContain('sk-very-secret');
    expect(printed).toContain('[redacted]');
  });

  it('is frozen once loaded', () => {
    const c = loadConfig({ env: {} });
    expect(Object.isFrozen(c) && Object.isFrozen(c.server)).toBe(true);
  });
});

describe('documentation of the options', () => {
  it('lists every option of the schema in docs/configuration.md exactly as `config --reference` prints it', async () => {
    const { configReference } = await import('../../src/config/index.js');
    const doc = readFileSync(path.join(PACKAGE_ROOT, 'docs', 'configuration.md'), 'utf8');
    expect(doc).toContain(configReference());
  });

  it('keeps the production example valid', () => {
    const f = path.join(PACKAGE_ROOT, 'config', 'production.example.json');
    expect(() => loadConfig({ env: { SOURCEBOUND_CONFIG: f } })).not.toThrow();
  });
});
