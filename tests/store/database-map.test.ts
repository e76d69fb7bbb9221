import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { openStore } from '../../src/store/index.js';

// Pages read through SQLite's memory map count in the process's resident size; the connections that read in
// batches (the job thread, the start-up index thread, the lexical change thread) open without it.
const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

describe('the database memory map', () => {
  it('is on by default (1 GiB) and off when a connection is opened with mmap false, read-only ones too', () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-mmap-'));
    dirs.push(dir);
    const file = path.join(dir, 'db.sqlite');
    const mapped = openStore(file);
    const plain = openStore(file, { mmap: false });
    const reader = openStore(file, { readonly: true, mmap: false });
    try {
      expect(mapped.db.pragma('mmap_size', { simple: true })).toBe(1024 * 1024 * 1024);
      expect(plain.db.pragma('mmap_size', { simple: true })).toBe(0);
      expect(reader.db.pragma('mmap_size', { simple: true })).toBe(0);
    } finally {
      reader.close();
      plain.close();
      mapped.close();
    }
  });
});
