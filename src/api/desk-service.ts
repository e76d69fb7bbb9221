// What the reference desk reads besides answers: a cited passage in its surrounding text, and the
// original file of a document. Both are confined to one collection; the HTTP layer checks the key.

import { createHash, createHmac, randomBytes, timingSafeEqual } from 'node:crypto';
import { readFile, realpath, stat } from 'node:fs/promises';
import path from 'node:path';
import { SourceboundError } from '../errors.js';
import type { AsyncRatingStore, Originals, RatingStore, Repository } from '../store/index.js';

export interface Passage {
  documentId: string;
  source: string;
  title: string;
  format: string;
  effectiveDate: string | null;
  /** Heading path of the chunk the span starts in, joined with " > " as in citations. */
  section: string;
  /** Pages spanned by the surrounding chunks (PDF), else null. */
  page: number | null;
  pageEnd: number | null;
  /** The requested span and the text around it: before + quote + after is an exact slice of the document. */
  start: number;
  end: number;
  contextStart: number;
  contextEnd: number;
  before: string;
  quote: string;
  after: string;
}

export interface OriginalFile {
  bytes: Buffer;
  fileName: string;
  contentType: string;
}

/** `R`: the embedded store's ratings (synchronous) or the PostgreSQL back end's (promises); the routes await either. */
export interface DeskService<R extends RatingStore | AsyncRatingStore = RatingStore | AsyncRatingStore> {
  passage(collection: string, documentId: string, start: number, end: number): Passage;
  original(collection: string, documentId: string): Promise<OriginalFile>;
  /**
   * A short-lived, signed path that opens one document's original without a key, so a browser can
   * follow it as a plain link (and honour `#page=N`); the caller has checked the key's rights.
   */
  linkOriginal(collection: string, documentId: string): { path: string; expiresAt: string };
  /** The document a link names; throws SB_ERR_LINK_INVALID when it is forged, malformed or expired. */
  redeemLink(token: string): { collection: string; documentId: string };
  ratings: R;
}

/** How long a file link works: long enough to open it, too short to be worth copying from a log. */
export const LINK_TTL_MS = 60_000;

/** Longest quote the reader will place; citations are sentences, far shorter. */
export const PASSAGE_MAX_SPAN = 20_000;
// Context around a quote: the chunks it lies in, but never more than this either side, so a reader
// of a long chunk still sees the quote near the top.
const CONTEXT_MAX = 1_200;

const CONTENT_TYPES: Record<string, string> = {
  pdf: 'application/pdf',
  markdown: 'text/markdown; charset=utf-8',
  html: 'text/html; charset=utf-8',
  text: 'text/plain; charset=utf-8',
  docx: 'application/vnd.openxmlformats-officedocument.wordprocessingml.document',
};

const inside = (child: string, parent: string): boolean => child.startsWith(parent.endsWith(path.sep) ? parent : parent + path.sep);

/** Moves a context edge off the middle of a word: forward for a start, back for an end, never past the quote. */
export function snapToWord(text: string, at: number, dir: 1 | -1, stop: number): number {
  let p = at;
  const mid = (i: number): boolean => i > 0 && i < text.length && !/\s/.test(text[i - 1]!) && !/\s/.test(text[i]!);
  for (let n = 0; n < 80 && mid(p) && p !== stop; n++) p += dir;
  return mid(p) ? at : p;
}

export function createDeskService<R extends RatingStore | AsyncRatingStore>(deps: {
  repo: Pick<Repository, 'getDocument' | 'getDocumentText' | 'listSourceRoots' | 'chunkSpans'>;
  ratings: R;
  /** Uploaded originals kept by content hash: read when the folder's file is gone or is another version. */
  originals?: Pick<Originals, 'find'>;
  now?: () => number;
  secret?: Buffer;
}): DeskService<R> {
  const { repo } = deps;
  const now = deps.now ?? Date.now;
  // Per process: links die with a restart, which their lifetime makes harmless.
  const secret = deps.secret ?? randomBytes(32);
  const sign = (payload: string): Buffer => createHmac('sha256', secret).update(payload).digest();

  const find = (collection: string, id: string) => {
    const d = repo.getDocument(id);
    // Another collection's document looks exactly like a missing one.
    if (!d || d.collection !== collection) throw new SourceboundError('SB_ERR_UNKNOWN_DOCUMENT', [id]);
    return d;
  };

  return {
    ratings: deps.ratings,

    passage(collection, documentId, start, end) {
      const d = find(collection, documentId);
      const text = repo.getDocumentText(d.id) ?? '';
      if (!(Number.isInteger(start) && Number.isInteger(end) && start >= 0 && end > start && end <= text.length)) {
        throw new SourceboundError('SB_ERR_VALIDATION', [`start and end must satisfy 0 <= start < end <= ${text.length} (the document's length)`]);
      }
      if (end - start > PASSAGE_MAX_SPAN) throw new SourceboundError('SB_ERR_VALIDATION', [`a passage span is at most ${PASSAGE_MAX_SPAN} characters`]);
      const chunks = repo.chunkSpans(d.id, start, end);
      const first = chunks[0];
      const last = chunks[chunks.length - 1];
      const cs = snapToWord(text, Math.floor(Math.max(first ? first.start : 0, start - CONTEXT_MAX, 0)), 1, start);
      const ce = snapToWord(text, Math.ceil(Math.min(last ? last.end : text.length, end + CONTEXT_MAX, text.length)), -1, end);
      const pages = chunks.flatMap((c) => [c.pageStart, c.pageEnd]).filter((p): p is number => p !== null);
      return {
        documentId: d.id,
        source: d.source,
        title: d.title,
        format: d.format,
        effectiveDate: d.effectiveDate,
        section: first ? first.headingPath.join(' > ') : '',
        page: pages.length > 0 ? Math.min(...pages) : null,
        pageEnd: pages.length > 0 ? Math.max(...pages) : null,
        start,
        end,
        contextStart: cs,
        contextEnd: ce,
        before: text.slice(cs, start),
        quote: text.slice(start, end),
        after: text.slice(end, ce),
      };
    },

    linkOriginal(collection, documentId) {
      const d = find(collection, documentId);
      const exp = now() + LINK_TTL_MS;
      const payload = Buffer.from(JSON.stringify({ c: collection, d: d.id, e: exp })).toString('base64url');
      // In the query string: a path parameter this long would pass the router's length limit.
      return { path: `/originals?link=${payload}.${sign(payload).toString('base64url')}`, expiresAt: new Date(exp).toISOString() };
    },

    redeemLink(token) {
      const invalid = (): never => {
        throw new SourceboundError('SB_ERR_LINK_INVALID');
      };
      const m = /^([A-Za-z0-9_-]{1,2000})\.([A-Za-z0-9_-]{43})$/.exec(token);
      if (!m) return invalid();
      const given = Buffer.from(m[2]!, 'base64url');
      // 43 base64url characters carry 258 bits for a 256-bit MAC: the last character's two spare bits are
      // ignored by the decoder, so four spellings decode to the same bytes. Only the one the service
      // writes is accepted; anything else is a forgery, whatever it decodes to.
      if (given.toString('base64url') !== m[2]) return invalid();
      const expected = sign(m[1]!);
      if (given.length !== expected.length || !timingSafeEqual(given, expected)) return invalid();
      let claims: { c?: unknown; d?: unknown; e?: unknown };
      try {
        claims = JSON.parse(Buffer.from(m[1]!, 'base64url').toString('utf8')) as typeof claims;
      } catch {
        return invalid();
      }
      if (typeof claims.c !== 'string' || typeof claims.d !== 'string' || typeof claims.e !== 'number' || claims.e < now()) return invalid();
      return { collection: claims.c, documentId: claims.d };
    },

    async original(collection, documentId) {
      const d = find(collection, documentId);
      try {
        return await fromFolder(d);
      } catch (err) {
        // The folder's file was replaced by a later upload (one that failed, or is still queued) or is gone: the
        // copy kept under the indexed version's hash is that version, byte for byte.
        const kept = deps.originals?.find(collection, d.contentHash);
        const code = err instanceof SourceboundError ? err.code : null;
        if (!kept || (code !== 'SB_ERR_ORIGINAL_CHANGED' && code !== 'SB_ERR_ORIGINAL_UNAVAILABLE')) throw err;
        const bytes = await readFile(kept);
        if (createHash('sha256').update(bytes).digest('hex') !== d.contentHash) throw err;
        return { bytes, fileName: path.basename(d.source), contentType: CONTENT_TYPES[d.format] ?? 'application/octet-stream' };
      }
    },
  };

  async function fromFolder(d: NonNullable<ReturnType<typeof repo.getDocument>>): Promise<OriginalFile> {
    const collection = d.collection;
    const unavailable = (why: string): never => {
      throw new SourceboundError('SB_ERR_ORIGINAL_UNAVAILABLE', [d.id, why]);
    };
    if (!d.root) return unavailable('it was not ingested from a file');
    const roots = new Set(repo.listSourceRoots(collection).map((r) => path.resolve(r.root)));
    const root = path.resolve(d.root);
    // A folder the collection was ingested from, or the folder of a single file ingested by path
    // (then the source is that bare file name). Nothing else is ever read.
    if (!roots.has(root) && d.source.includes('/')) return unavailable('its folder is not one of the collection\'s sources');
    const file = path.resolve(root, ...d.source.split('/'));
    if (!inside(file, root)) return unavailable('its path leads outside its source folder');
    let real: string;
    try {
      real = await realpath(file);
      // A symbolic link inside the folder must not lead out of it either.
      if (!inside(real, await realpath(root))) return unavailable('its path leads outside its source folder');
      if (!(await stat(real)).isFile()) return unavailable('it is not a regular file');
    } catch (err) {
      if (err instanceof SourceboundError) throw err;
      return unavailable('the file is no longer in its source folder');
    }
    const bytes = await readFile(real);
    if (createHash('sha256').update(bytes).digest('hex') !== d.contentHash) throw new SourceboundError('SB_ERR_ORIGINAL_CHANGED', [d.id]);
    return { bytes, fileName: path.basename(file), contentType: CONTENT_TYPES[d.format] ?? 'application/octet-stream' };
  }
}
