import { readdirSync, rmSync, statSync } from 'node:fs';
import path from 'node:path';

/** The prefix of an upload's file while it is being received (dot-prefixed, so no folder walk takes it up). */
export const INCOMING_PREFIX = '.incoming-';

/** Where the document API keeps a collection's uploads. */
export function uploadsDir(dataDir: string, collection?: string): string {
  return collection === undefined ? path.join(dataDir, 'uploads') : path.join(dataDir, 'uploads', collection);
}

/**
 * Removes upload files that were still being received when their server stopped (SIGKILL, a crash, a power
 * cut): no job was made for them, so nothing else ever would. Only files last written before `before` (this
 * process's start) go, so an upload another server on the same data folder is receiving right now is left
 * alone. Returns the paths removed.
 */
export function removeStaleIncoming(dataDir: string, before: number): string[] {
  const removed: string[] = [];
  let collections: string[];
  try {
    collections = readdirSync(uploadsDir(dataDir));
  } catch (err) {
    if ((err as NodeJS.ErrnoException).code === 'ENOENT') return removed;
    throw err;
  }
  for (const c of collections) {
    const dir = uploadsDir(dataDir, c);
    let names: string[];
    try {
      names = readdirSync(dir).filter((n) => n.startsWith(INCOMING_PREFIX));
    } catch {
      continue; // not a folder
    }
    for (const n of names) {
      const file = path.join(dir, n);
      try {
        if (statSync(file).mtimeMs >= before) continue;
        rmSync(file, { force: true });
        removed.push(file);
      } catch (err) {
        if ((err as NodeJS.ErrnoException).code !== 'ENOENT') throw err;
      }
    }
  }
  return removed;
}
