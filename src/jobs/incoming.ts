import { createHash, randomUUID } from 'node:crypto';
import { createWriteStream, mkdirSync, readdirSync, rmSync, statSync } from 'node:fs';
import path from 'node:path';
import type { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import { SourceboundError } from '../errors.js';

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

/**
 * Streams an upload into `folder` under an incoming name, counting and hashing it on the way, and stops at
 * `maxBytes` (nothing past the limit is written). Returns the file and its sha256; on failure nothing is left.
 */
export async function receiveUpload(folder: string, body: Readable | Uint8Array, maxBytes: number): Promise<{ tmp: string; contentHash: string }> {
  mkdirSync(folder, { recursive: true });
  // Dot-prefixed, so a concurrent folder walk never picks up a half-written upload.
  const tmp = path.join(folder, `${INCOMING_PREFIX}${randomUUID()}`);
  const hash = createHash('sha256');
  let size = 0;
  try {
    const source = body instanceof Uint8Array ? (async function* () { yield body; })() : body;
    await pipeline(
      source,
      async function* (chunks: AsyncIterable<Buffer | Uint8Array>) {
        for await (const c of chunks) {
          size += c.length;
          if (size > maxBytes) throw new SourceboundError('SB_ERR_UPLOAD_TOO_LARGE', [maxBytes]);
          hash.update(c);
          yield c;
        }
      },
      createWriteStream(tmp),
    );
    if ((body as Readable & { truncated?: boolean }).truncated) throw new SourceboundError('SB_ERR_UPLOAD_TOO_LARGE', [maxBytes]);
  } catch (err) {
    rmSync(tmp, { force: true });
    throw err;
  }
  return { tmp, contentHash: hash.digest('hex') };
}
