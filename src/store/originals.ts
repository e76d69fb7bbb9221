// Originals of uploaded documents, kept by content hash (<dataDir>/originals/<collection>/<sha256>). The upload
// folder holds each document under its name, which a later upload of the same name replaces; the copy kept here
// under the hash of the version that was indexed is what "open the original" falls back to, and what restores
// the folder when a replacement turns out unreadable.

import { copyFileSync, existsSync, linkSync, mkdirSync, readdirSync, renameSync, rmSync } from 'node:fs';
import path from 'node:path';

export interface Originals {
  /** Keeps `file` as the original with content hash `hash` (a hard link where the file system allows). */
  keep(collection: string, hash: string, file: string): void;
  /** The kept original with this hash, or null. */
  find(collection: string, hash: string): string | null;
  drop(collection: string, hash: string): void;
  /** Every kept original. */
  list(): { collection: string; hash: string; file: string }[];
}

const HASH = /^[0-9a-f]{64}$/;

export function createOriginals(dir: string): Originals {
  const fileOf = (collection: string, hash: string): string => {
    if (!HASH.test(hash)) throw new Error(`not a sha256 content hash: ${hash}`);
    return path.join(dir, collection, hash);
  };
  return {
    keep(collection, hash, file) {
      const to = fileOf(collection, hash);
      if (existsSync(to)) return;
      mkdirSync(path.dirname(to), { recursive: true });
      const tmp = `${to}.tmp-${process.pid}`;
      try {
        linkSync(file, tmp);
      } catch {
        copyFileSync(file, tmp);
      }
      // Renamed into place, so a kept original is always whole (two uploads of the same bytes write the same).
      renameSync(tmp, to);
    },
    find(collection, hash) {
      if (!HASH.test(hash)) return null;
      const f = fileOf(collection, hash);
      return existsSync(f) ? f : null;
    },
    drop(collection, hash) {
      if (HASH.test(hash)) rmSync(fileOf(collection, hash), { force: true });
    },
    list() {
      if (!existsSync(dir)) return [];
      return readdirSync(dir, { withFileTypes: true })
        .filter((e) => e.isDirectory())
        .flatMap((c) => readdirSync(path.join(dir, c.name)).map((h) => ({ collection: c.name, hash: h, file: path.join(dir, c.name, h) })));
    },
  };
}
