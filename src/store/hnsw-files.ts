// The files of a collection's vector index: `<collection>.g<generation>.hnsw` (hnswlib's own format) and
// `<collection>.meta.json`, which names the index file and the generation it holds. Renaming the meta file into
// place is the commit point of a save, so a reader sees the old pair or the new one, never half of either.

import { closeSync, existsSync, fsyncSync, openSync, readdirSync, readFileSync, renameSync, statSync, unlinkSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { threadId } from 'node:worker_threads';
import hnswlib from 'hnswlib-node';

const { HierarchicalNSW } = hnswlib;
export type Hnsw = InstanceType<typeof HierarchicalNSW>;

/** Written beside each index file. */
export interface IndexMeta {
  version: 1;
  embedderId: string;
  dimensions: number;
  generation: number;
  file: string;
  m: number;
  efConstruction: number;
  /** Labels marked deleted (hnswlib keeps them in getIdsList). */
  deleted: number[];
}

const SAFE_NAME = /^[A-Za-z0-9._-]+$/;

export function fileSafe(collection: string): string {
  if (SAFE_NAME.test(collection)) return collection;
  return Buffer.from(collection).toString('hex');
}

type Expected = { embedderId: string; dimensions: number };
type Loaded = { index: Hnsw; meta: IndexMeta } | { index: null; reason: string | null };

export function createIndexFiles(dir: string) {
  const metaPath = (c: string): string => path.join(dir, `${fileSafe(c)}.meta.json`);
  // The meta file's identity when it was last read, per collection: a reader that is behind looks at the meta
  // on every query, and a stat is all that costs while nothing new was saved.
  const seen = new Map<string, { stamp: string; generation: number | null }>();

  const readMeta = (c: string): IndexMeta | null => {
    try {
      const m = JSON.parse(readFileSync(metaPath(c), 'utf8')) as IndexMeta;
      return m.version === 1 ? m : null;
    } catch {
      return null;
    }
  };

  /** The saved file of `c` when there is one made with the expected embedder; else why there is none to read. */
  const locate = (c: string, expect: Expected): { meta: IndexMeta; file: string } | { index: null; reason: string | null } => {
    const meta = readMeta(c);
    if (!meta) return { index: null, reason: null };
    if (meta.embedderId !== expect.embedderId || meta.dimensions !== expect.dimensions) return { index: null, reason: `built with ${meta.embedderId}` };
    const file = path.join(dir, meta.file);
    return existsSync(file) ? { meta, file } : { index: null, reason: null };
  };
  return {
    dir,
    metaPath,
    readMeta,
    /** The generation the saved index holds (null: none saved), re-reading the meta only when it changed. */
    savedGeneration(c: string): number | null {
      let stamp: string;
      try {
        const s = statSync(metaPath(c));
        stamp = `${s.ino}:${s.mtimeMs}:${s.size}`;
      } catch {
        return null;
      }
      const last = seen.get(c);
      if (last && last.stamp === stamp) return last.generation;
      const generation = readMeta(c)?.generation ?? null;
      seen.set(c, { stamp, generation });
      return generation;
    },
    /**
     * Writes `index` as collection `c` at `generation` and returns the meta written, or null when another
     * writer has already saved a later generation (its files are kept: a save never moves the meta back).
     */
    save(c: string, index: Hnsw, meta: Omit<IndexMeta, 'file' | 'generation'>, generation: number): IndexMeta | null {
      const file = `${fileSafe(c)}.g${generation}.hnsw`;
      const full = path.join(dir, file);
      // The job worker thread shares the process id with the request thread: both name their temporaries.
      const tmp = `${full}.tmp-${process.pid}-${threadId}`;
      index.writeIndexSync(tmp);
      fsyncFile(tmp);
      const onDisk = readMeta(c);
      if (onDisk && onDisk.generation > generation && onDisk.file !== file && existsSync(path.join(dir, onDisk.file))) {
        unlinkQuietly(tmp);
        return null;
      }
      renameSync(tmp, full);
      const written: IndexMeta = { ...meta, generation, file };
      const metaTmp = `${metaPath(c)}.tmp-${process.pid}-${threadId}`;
      writeFileSync(metaTmp, JSON.stringify(written));
      fsyncFile(metaTmp);
      renameSync(metaTmp, metaPath(c));
      fsyncDir(dir);
      if (onDisk && onDisk.file !== file) unlinkQuietly(path.join(dir, onDisk.file));
      removeOrphanTemporaries(dir);
      return written;
    },
    /** Reads the saved index of `c`; null when there is none, or it is unreadable or of another embedder. */
    load(c: string, expect: Expected): Loaded {
      const found = locate(c, expect);
      if (!('file' in found)) return found;
      try {
        const index = new HierarchicalNSW('ip', expect.dimensions);
        index.readIndexSync(found.file);
        return { index, meta: found.meta };
      } catch (err) {
        return { index: null, reason: `unreadable: ${(err as Error).message}` };
      }
    },
    /**
     * `load` with the file read by hnswlib off the JavaScript thread (its asynchronous readIndex): a reader keeps
     * answering from the index it has while the next one is read.
     */
    async loadAsync(c: string, expect: Expected): Promise<Loaded> {
      const found = locate(c, expect);
      if (!('file' in found)) return found;
      try {
        const index = new HierarchicalNSW('ip', expect.dimensions);
        if (!(await index.readIndex(found.file))) return { index: null, reason: 'unreadable' };
        return { index, meta: found.meta };
      } catch (err) {
        return { index: null, reason: `unreadable: ${(err as Error).message}` };
      }
    },
    /** Removes the saved files of `c` but `keep`. */
    remove(c: string, keep?: string): void {
      const meta = readMeta(c);
      for (const f of [meta?.file ? path.join(dir, meta.file) : null, metaPath(c)]) {
        if (!f || (keep && f === path.join(dir, keep))) continue;
        unlinkQuietly(f);
      }
    },
  };
}

export type IndexFiles = ReturnType<typeof createIndexFiles>;

export function newIndex(dimensions: number, capacity: number, params: { m: number; efConstruction: number }): Hnsw {
  const idx = new HierarchicalNSW('ip', dimensions);
  idx.initIndex({ maxElements: Math.max(16, capacity), m: params.m, efConstruction: params.efConstruction, randomSeed: 100 });
  return idx;
}

/**
 * Removes the temporaries of saves that a killed process left (their names carry its process id). A live
 * process's, this one's included, are left alone.
 */
function removeOrphanTemporaries(dir: string): void {
  let names: string[];
  try {
    names = readdirSync(dir);
  } catch {
    return;
  }
  for (const name of names) {
    const m = /\.tmp-(\d+)-\d+$/.exec(name);
    if (!m || Number(m[1]) === process.pid || processAlive(Number(m[1]))) continue;
    unlinkQuietly(path.join(dir, name));
  }
}

function processAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    // EPERM: it exists, under another user.
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

export function unlinkQuietly(file: string): void {
  try {
    unlinkSync(file);
  } catch {
    /* already gone, or another process removed it */
  }
}

function fsyncFile(file: string): void {
  const fd = openSync(file, 'r+');
  try {
    fsyncSync(fd);
  } finally {
    closeSync(fd);
  }
}

function fsyncDir(dir: string): void {
  try {
    const fd = openSync(dir, 'r');
    try {
      fsyncSync(fd);
    } finally {
      closeSync(fd);
    }
  } catch {
    /* not every platform can fsync a directory */
  }
}
