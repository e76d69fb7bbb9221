import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CLI, ROOT, startServe, type ServeProcess } from '../fixtures/serve.js';
import { runSync } from '../fixtures/wait.js';

// The contract of DESIGN.md, checked from outside: a real `sourcebound serve` process on an empty data
// folder ingests the demo documents, reports ready, answers with verbatim citations, and stops cleanly.

let server: ServeProcess | undefined;
let base = '';
let dataDir = '';

beforeAll(async () => {
  dataDir = mkdtempSync(path.join(tmpdir(), 'sb-e2e-'));
  server = await startServe({ SOURCEBOUND_DATA_DIR: dataDir });
  base = server.base;
}, 70_000);

afterAll(async () => {
  // Gone before its data folder is removed, so it cannot write into the folder while it is being deleted.
  await server?.stop();
  rmSync(dataDir, { recursive: true, force: true });
});

const answer = async (question: string) => {
  const res = await fetch(`${base}/v1/answer`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ question }) });
  return { status: res.status, body: (await res.json()) as Record<string, any> };
};

describe('sourcebound serve on the demo documents', () => {
  it('is healthy and ready, and says which embedder it runs', async () => {
    const h = (await (await fetch(`${base}/health`)).json()) as { status: string; embedder: { semantic: boolean }; lexicalIndex: { ready: boolean; building: boolean } };
    expect(h.status).toBe('ok');
    expect(h.embedder.semantic).toBe(false);
    expect((await fetch(`${base}/ready`)).status).toBe(200);
    // Ready means the in-memory BM25 index is built, before any query asked for it: a load arriving at a ready
    // service is not answered by FTS5's slow path while the build waits behind it.
    expect(h.lexicalIndex).toMatchObject({ ready: true, building: false });
  });

  it('answers a question about a PDF with the right document, page and a verbatim quote', async () => {
    const { status, body } = await answer('What protective equipment must staff wear in the depot?');
    expect(status).toBe(200);
    expect(body.abstained).toBe(false);
    const c = body.citations[0];
    expect(c.source).toBe('tram-depot-safety-procedures.pdf');
    expect(c.page).toBeGreaterThanOrEqual(1);
    expect(c.section).toBeTruthy();
    // The quote is verbatim in the PDF's text on that page, as pdf-parse extracts it.
    const { PDFParse } = await import('pdf-parse');
    const { readFileSync } = await import('node:fs');
    const parser = new PDFParse({ data: new Uint8Array(readFileSync(path.join(ROOT, 'seed-docs', c.source))) });
    const pages = (await parser.getText()).pages.map((p: { text: string }) => p.text.replace(/\s+/g, ' '));
    await parser.destroy();
    const squash = (s: string) => s.replace(/\s+/g, ' ').replace(/-\s/g, '');
    expect(squash(pages[c.page - 1]!).replace(/-\s/g, '')).toContain(squash(c.quote).slice(0, 40));
  });

  it('answers a question about a Markdown policy citing its section', async () => {
    const { body } = await answer('How long are found items kept by the Lost Property Office?');
    expect(body.abstained).toBe(false);
    expect(body.citations[0].source).toBe('lost-property.md');
    expect(body.citations[0].section).toBeTruthy();
    expect(body.caution).toBeTruthy();
  });

  it('abstains on a question the documents do not cover', async () => {
    const { body } = await answer('Who won the football league in 1987?');
    expect(body.abstained).toBe(true);
  });

  it('stops cleanly on SIGTERM', async () => {
    server!.child.kill('SIGTERM');
    // Checks for an exit that already happened before listening for one.
    expect(await server!.exited()).toEqual({ code: 0, signal: null });
  });
});

describe('the CLI', () => {
  it('prints the effective config with secrets redacted', () => {
    const r = runSync(process.execPath, [CLI, 'config'], {
      cwd: ROOT,
      env: { ...process.env, SOURCEBOUND_COMPLETION_API_KEY: 'sk-should-not-print' },
    });
    expect(r.status).toBe(0);
    expect(r.stdout).not.toContain('sk-should-not-print');
    expect(JSON.parse(r.stdout).completion.apiKey).toBe('[redacted]');
  });

  it('refuses an invalid PORT with a message naming it, and exits non-zero', () => {
    const r = runSync(process.execPath, [CLI, 'config'], { cwd: ROOT, env: { ...process.env, PORT: 'eighty' } });
    expect(r.status).not.toBe(0);
    expect(r.stderr).toContain('PORT');
  });

  it('ingests with --json while the server is stopped, and a later reindex embeds nothing', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-cli-'));
    try {
      const env = { ...process.env, SOURCEBOUND_DATA_DIR: dir, SOURCEBOUND_EMBEDDER: 'hashing' };
      const r = runSync(process.execPath, [CLI, 'ingest', path.join(ROOT, 'seed-docs'), '--collection', 'demo', '--json'], { cwd: ROOT, env });
      expect(r.status, r.stderr).toBe(0);
      const s = JSON.parse(r.stdout);
      expect(s.documents.added).toBeGreaterThanOrEqual(12);
      expect(s.documents.failed).toBe(0);
      expect(s.chunks.embedded).toBeGreaterThan(0);
      const again = runSync(process.execPath, [CLI, 'reindex', '--json'], { cwd: ROOT, env });
      expect(again.status, again.stderr).toBe(0);
      const s2 = JSON.parse(again.stdout);
      expect(s2.chunks.embedded).toBe(0);
      expect(s2.documents.unchanged).toBe(s.documents.added);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('makes an API key whose printed entry matches the key by SHA-256', async () => {
    const r = runSync(process.execPath, [CLI, 'key', 'new', '--id', 'desk', '--scopes', 'query,ingest', '--collections', 'default'], { cwd: ROOT });
    expect(r.status).toBe(0);
    const key = /\n  (sbk_[A-Za-z0-9_-]{43})\n/.exec(r.stdout)![1]!;
    const entry = JSON.parse(r.stdout.slice(r.stdout.indexOf('{')));
    const { createHash } = await import('node:crypto');
    expect(entry).toEqual({ id: 'desk', sha256: createHash('sha256').update(key).digest('hex'), scopes: ['query', 'ingest'], collections: ['default'] });
  });

  it('refuses to serve on a non-loopback address without keys', () => {
    const r = runSync(process.execPath, [CLI, 'serve'], { cwd: ROOT, env: { ...process.env, HOST: '0.0.0.0', PORT: '0' }, timeoutMs: 20_000 });
    expect(r.status).not.toBe(0);
    expect(r.stderr).toMatch(/no API keys/);
  });

  it('backs up the database to a file that opens and holds the documents', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-backup-'));
    try {
      const env = { ...process.env, SOURCEBOUND_DATA_DIR: dir, SOURCEBOUND_EMBEDDER: 'hashing' };
      expect(runSync(process.execPath, [CLI, 'ingest', path.join(ROOT, 'seed-docs', 'lost-property.md'), '--json'], { cwd: ROOT, env }).status).toBe(0);
      const dest = path.join(dir, 'copy.db');
      const r = runSync(process.execPath, [CLI, 'backup', dest], { cwd: ROOT, env });
      expect(r.status, r.stderr).toBe(0);
      const Database = (await import('better-sqlite3')).default;
      const db = new Database(dest, { readonly: true });
      expect((db.prepare('SELECT count(*) AS n FROM documents').get() as { n: number }).n).toBe(1);
      expect(db.pragma('integrity_check', { simple: true })).toBe('ok');
      db.close();
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
