// A bounded reader for ZIP packages (PKWARE APPNOTE.TXT, sections 4.3.7 local header, 4.3.12 central
// directory header, 4.3.16 end of central directory record). A .docx is such a package. A ZIP bomb is a small
// file whose entries inflate to gigabytes, so the reader checks the entry count and the sizes the central
// directory declares before inflating anything, and then inflates each entry with a hard cap on its output,
// since a declared size can be a lie. Each entry is inflated a piece at a time into one buffer of its declared
// size (zlib's one-shot call would collect its output in pieces and then join them: twice the entry), and a
// caller may read each piece as it comes and stop the inflation there (load-docx.ts counts a part's text so).
// What comes out is written back as a package of stored (uncompressed) entries: the converter that reads it
// next then never inflates anything this reader did not measure.
import { createInflateRaw } from 'node:zlib';
import { LimitExceeded, type DocumentLimits } from './budget.js';

const EOCD_SIG = 0x06054b50;
const CENTRAL_SIG = 0x02014b50;
const LOCAL_SIG = 0x04034b50;
const EOCD_SIZE = 22;
const MAX_COMMENT = 0xffff;

export interface ZipEntry {
  /** The entry's name as stored (bytes, so names round-trip exactly). */
  name: Uint8Array;
  data: Uint8Array;
}

/** A package that is not a well-formed ZIP, or uses features this reader does not accept. */
export class ZipFormatError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ZipFormatError';
  }
}

const fmt = (n: number): string => n.toLocaleString('en-US');

function findEndOfCentralDirectory(view: DataView): number {
  const last = view.byteLength - EOCD_SIZE;
  const first = Math.max(0, last - MAX_COMMENT);
  for (let i = last; i >= first; i--) if (view.getUint32(i, true) === EOCD_SIG) return i;
  throw new ZipFormatError('not a ZIP package: no end of central directory record');
}

/** Reads an entry's bytes as they are inflated; a throw stops the inflation and the read. */
export interface EntryReader {
  piece(bytes: Uint8Array): void;
  /** After the entry's last piece. */
  end(): void;
}

/** Pieces zlib hands over at a time. */
const PIECE_BYTES = 64 * 1024;

/**
 * Inflates a raw DEFLATE stream into one buffer of the `expected` bytes its header declares, handing each piece
 * to `reader` as it comes. Throws `overLimit()` as soon as the output would pass `cap`; nothing past it is
 * inflated. A stream longer than declared keeps what overflows in its pieces and joins them at the end (only an
 * entry that lies and still ends within the cap is ever held twice, and only then).
 */
async function inflateBounded(raw: Uint8Array, expected: number, cap: number, overLimit: () => Error, reader: EntryReader | null): Promise<Uint8Array> {
  const inflater = createInflateRaw({ chunkSize: PIECE_BYTES });
  inflater.end(raw);
  const out = Buffer.allocUnsafe(Math.min(Math.max(expected, 0), cap));
  const overflow: Buffer[] = [];
  let length = 0;
  try {
    // The stream waits for each piece to be read before it inflates the next, so only one is in flight.
    for await (const piece of inflater as AsyncIterable<Buffer>) {
      if (length + piece.length > cap) throw overLimit();
      const fits = Math.max(0, Math.min(piece.length, out.length - length));
      piece.copy(out, length, 0, fits);
      if (fits < piece.length) overflow.push(piece.subarray(fits));
      length += piece.length;
      reader?.piece(piece);
    }
  } catch (err) {
    inflater.destroy();
    if ((err as NodeJS.ErrnoException).code?.startsWith('Z_')) {
      throw new ZipFormatError(`corrupt ZIP package: an entry does not inflate (${(err as Error).message})`);
    }
    throw err;
  }
  reader?.end();
  return overflow.length === 0 ? out.subarray(0, length) : Buffer.concat([out.subarray(0, Math.min(length, out.length)), ...overflow], length);
}

/**
 * The entries of a ZIP package, inflated within `limits.zipMaxEntries` and `limits.zipMaxInflatedBytes`.
 * Memory stays within the inflated limit plus the input: no entry is inflated past what is left of it, and
 * each is held once. `readerFor` may give a reader for an entry (by its name), which sees its bytes as they
 * are inflated and may stop the whole read by throwing.
 */
export async function readZipBounded(
  bytes: Uint8Array,
  limits: Pick<DocumentLimits, 'zipMaxEntries' | 'zipMaxInflatedBytes'>,
  readerFor: (name: Uint8Array) => EntryReader | null = () => null,
): Promise<ZipEntry[]> {
  const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  if (bytes.byteLength < EOCD_SIZE) throw new ZipFormatError('not a ZIP package: too short');
  const eocd = findEndOfCentralDirectory(view);
  const declaredEntries = view.getUint16(eocd + 10, true);
  const centralSize = view.getUint32(eocd + 12, true);
  const centralOffset = view.getUint32(eocd + 16, true);
  // 0xFFFF / 0xFFFFFFFF mean "see the ZIP64 record" (4.4.1.4): no document within the limits needs one.
  if (declaredEntries === 0xffff || centralOffset === 0xffffffff || centralSize === 0xffffffff) {
    throw new ZipFormatError('the package uses ZIP64 records, which only packages far over the size limits need');
  }
  if (declaredEntries > limits.zipMaxEntries) {
    throw new LimitExceeded(
      'zipMaxEntries',
      `the package declares ${fmt(declaredEntries)} entries, over the limit of ${fmt(limits.zipMaxEntries)} (limits.zipMaxEntries)`,
    );
  }
  if (centralOffset + centralSize > eocd) throw new ZipFormatError('corrupt ZIP package: the central directory lies outside the file');

  interface Header {
    name: Uint8Array;
    method: number;
    flags: number;
    compressedSize: number;
    size: number;
    localOffset: number;
  }
  const headers: Header[] = [];
  let declaredTotal = 0;
  let at = centralOffset;
  const end = centralOffset + centralSize;
  // Walk what is really there, not only the declared count: a directory may hold more headers than it says.
  while (at + 46 <= end && view.getUint32(at, true) === CENTRAL_SIG) {
    if (headers.length >= limits.zipMaxEntries) {
      throw new LimitExceeded(
        'zipMaxEntries',
        `the package holds more than ${fmt(limits.zipMaxEntries)} entries (limits.zipMaxEntries)`,
      );
    }
    const nameLength = view.getUint16(at + 28, true);
    const header: Header = {
      flags: view.getUint16(at + 8, true),
      method: view.getUint16(at + 10, true),
      compressedSize: view.getUint32(at + 20, true),
      size: view.getUint32(at + 24, true),
      localOffset: view.getUint32(at + 42, true),
      name: bytes.subarray(at + 46, at + 46 + nameLength),
    };
    declaredTotal += header.size;
    if (declaredTotal > limits.zipMaxInflatedBytes) {
      throw new LimitExceeded(
        'zipMaxInflatedBytes',
        `the package declares more than ${fmt(limits.zipMaxInflatedBytes)} bytes once inflated (limits.zipMaxInflatedBytes)`,
      );
    }
    headers.push(header);
    at += 46 + nameLength + view.getUint16(at + 30, true) + view.getUint16(at + 32, true);
  }
  if (headers.length === 0) throw new ZipFormatError('corrupt ZIP package: no entries in the central directory');

  const entries: ZipEntry[] = [];
  let left = limits.zipMaxInflatedBytes;
  const overLimit = (): LimitExceeded =>
    new LimitExceeded(
      'zipMaxInflatedBytes',
      `the package inflates to more than ${fmt(limits.zipMaxInflatedBytes)} bytes (limits.zipMaxInflatedBytes), more than its headers declare`,
    );
  for (const h of headers) {
    if (h.flags & 0x1) throw new ZipFormatError('the package is encrypted');
    const local = h.localOffset;
    if (local + 30 > bytes.byteLength || view.getUint32(local, true) !== LOCAL_SIG) {
      throw new ZipFormatError('corrupt ZIP package: an entry points at no local header');
    }
    const start = local + 30 + view.getUint16(local + 26, true) + view.getUint16(local + 28, true);
    if (start + h.compressedSize > bytes.byteLength) throw new ZipFormatError('corrupt ZIP package: an entry runs past the end of the file');
    const raw = bytes.subarray(start, start + h.compressedSize);
    let data: Uint8Array;
    const reader = readerFor(h.name);
    if (h.method === 0) {
      if (raw.byteLength > left) throw overLimit();
      data = raw;
      if (reader) {
        reader.piece(data);
        reader.end();
      }
    } else if (h.method === 8) {
      // Inflation stops as soon as the output would pass what is left, so a lying header costs no more memory.
      data = await inflateBounded(raw, h.size, left, overLimit, reader);
    } else {
      throw new ZipFormatError(`the package uses compression method ${h.method}; only stored and deflated entries are read`);
    }
    left -= data.byteLength;
    entries.push({ name: h.name, data });
  }
  return entries;
}

const CRC_TABLE = (() => {
  const t = new Uint32Array(256);
  for (let n = 0; n < 256; n++) {
    let c = n;
    for (let k = 0; k < 8; k++) c = c & 1 ? 0xedb88320 ^ (c >>> 1) : c >>> 1;
    t[n] = c >>> 0;
  }
  return t;
})();

/** CRC-32 as ZIP uses it (reflected polynomial 0xEDB88320, APPNOTE.TXT 4.4.7). */
export function crc32(bytes: Uint8Array): number {
  let c = 0xffffffff;
  for (let i = 0; i < bytes.length; i++) c = CRC_TABLE[(c ^ bytes[i]!) & 0xff]! ^ (c >>> 8);
  return (c ^ 0xffffffff) >>> 0;
}

/** An entry as it goes into a package: its bytes as stored, and what the headers say of them. */
export interface PackedZipEntry {
  name: Uint8Array;
  /** The stored bytes: the data itself (method 0) or its raw DEFLATE stream (method 8). */
  packed: Uint8Array;
  method: 0 | 8;
  /** The inflated size both headers declare. */
  size: number;
  crc: number;
}

/** A ZIP package of the entries, in the given order, with the sizes and CRCs they state. */
export function writeZip(entries: readonly PackedZipEntry[]): Buffer {
  const size = entries.reduce((n, e) => n + 30 + e.name.length + e.packed.length + 46 + e.name.length, EOCD_SIZE);
  const out = Buffer.alloc(size);
  const offsets: number[] = [];
  let at = 0;
  for (const e of entries) {
    offsets.push(at);
    out.writeUInt32LE(LOCAL_SIG, at);
    out.writeUInt16LE(20, at + 4); // version needed: 2.0
    out.writeUInt16LE(e.method, at + 8);
    out.writeUInt32LE(e.crc, at + 14);
    out.writeUInt32LE(e.packed.length, at + 18);
    out.writeUInt32LE(e.size, at + 22);
    out.writeUInt16LE(e.name.length, at + 26);
    out.set(e.name, at + 30);
    out.set(e.packed, at + 30 + e.name.length);
    at += 30 + e.name.length + e.packed.length;
  }
  const centralStart = at;
  entries.forEach((e, i) => {
    out.writeUInt32LE(CENTRAL_SIG, at);
    out.writeUInt16LE(20, at + 4);
    out.writeUInt16LE(20, at + 6);
    out.writeUInt16LE(e.method, at + 10);
    out.writeUInt32LE(e.crc, at + 16);
    out.writeUInt32LE(e.packed.length, at + 20);
    out.writeUInt32LE(e.size, at + 24);
    out.writeUInt16LE(e.name.length, at + 28);
    out.writeUInt32LE(offsets[i]!, at + 42);
    out.set(e.name, at + 46);
    at += 46 + e.name.length;
  });
  out.writeUInt32LE(EOCD_SIG, at);
  out.writeUInt16LE(entries.length, at + 8);
  out.writeUInt16LE(entries.length, at + 10);
  out.writeUInt32LE(at - centralStart, at + 12);
  out.writeUInt32LE(centralStart, at + 16);
  return out;
}

/** A ZIP package of the entries, stored (method 0), with true sizes and CRCs. */
export function writeStoredZip(entries: readonly ZipEntry[]): Buffer {
  return writeZip(entries.map((e) => ({ name: e.name, packed: e.data, method: 0, size: e.data.length, crc: crc32(e.data) })));
}
