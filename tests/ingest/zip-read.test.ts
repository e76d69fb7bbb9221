// The bounded ZIP reader inflates each entry a piece at a time into one buffer. It replaced a one-shot
// inflation (zlib's inflateRawSync with a cap on its output); what it returns must be byte for byte what that
// gave, whatever the headers declare, and a reader of the pieces must be able to stop it early.
// The DEFLATE streams are made by Node's zlib (RFC 1951); the reference inflation is zlib's one-shot call.
import { deflateRawSync, inflateRawSync } from 'node:zlib';
import { describe, expect, it } from 'vitest';
import { LimitExceeded } from '../../src/ingest/budget.js';
import { crc32, readZipBounded, writeZip, ZipFormatError, type PackedZipEntry } from '../../src/ingest/zip.js';

const limits = { zipMaxEntries: 100, zipMaxInflatedBytes: 8 * 1024 * 1024 };

/** Bytes from a seeded generator (a linear congruential generator), partly repetitive so they compress. */
function bytesOf(length: number, seed: number): Buffer {
  const out = Buffer.alloc(length);
  let s = seed >>> 0;
  for (let i = 0; i < length; i++) {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    out[i] = i % 7 === 0 ? s >>> 24 : 0x61 + (i % 13);
  }
  return out;
}

const deflated = (name: string, data: Uint8Array, declare?: number): PackedZipEntry => ({
  name: Buffer.from(name),
  packed: deflateRawSync(data),
  method: 8,
  size: declare ?? data.length,
  crc: crc32(data),
});

describe('readZipBounded', () => {
  const datas = [bytesOf(0, 1), bytesOf(10, 2), bytesOf(64 * 1024, 3), bytesOf(700_001, 4)];

  it('gives each entry the bytes the one-shot inflation gave, whether its header declares its size, less or more', async () => {
    for (const declare of [undefined, 1, 5_000_000]) {
      const packed = datas.map((d, i) => deflated(`part${i}.xml`, d, declare === undefined ? undefined : Math.min(declare, limits.zipMaxInflatedBytes / 8)));
      const entries = await readZipBounded(writeZip(packed), limits);
      expect(entries.map((e) => Buffer.from(e.name).toString())).toEqual(['part0.xml', 'part1.xml', 'part2.xml', 'part3.xml']);
      entries.forEach((e, i) => {
        const reference = inflateRawSync(packed[i]!.packed, { maxOutputLength: limits.zipMaxInflatedBytes });
        expect(Buffer.from(e.data).equals(reference), `entry ${i}, declared ${declare}`).toBe(true);
        expect(Buffer.from(e.data).equals(datas[i]!)).toBe(true);
      });
    }
  });

  it('hands a reader every byte of its entry in order, and ends it once', async () => {
    const seen: Buffer[] = [];
    let ends = 0;
    await readZipBounded(writeZip([deflated('a.bin', datas[3]!), deflated('b.xml', datas[2]!)]), limits, (name) =>
      Buffer.from(name).toString() === 'a.bin' ? { piece: (p) => seen.push(Buffer.from(p)), end: () => ends++ } : null,
    );
    expect(seen.length).toBeGreaterThan(1); // in pieces, not whole
    expect(Buffer.concat(seen).equals(datas[3]!)).toBe(true);
    expect(ends).toBe(1);
  });

  it('stops inflating as soon as a reader throws, and passes its error on', async () => {
    const big = Buffer.alloc(6 * 1024 * 1024, 'Tram stop ');
    let read = 0;
    const stop = new LimitExceeded('documentMaxChars', 'enough');
    await expect(
      readZipBounded(writeZip([deflated('word/document.xml', big)]), limits, () => ({
        piece(p) {
          read += p.length;
          if (read > 100_000) throw stop;
        },
        end() {},
      })),
    ).rejects.toBe(stop);
    expect(read).toBeLessThan(1024 * 1024);
  });

  it('refuses an entry that inflates past the limit while inflating, and a corrupt stream as corrupt', async () => {
    await expect(readZipBounded(writeZip([deflated('big.xml', Buffer.alloc(9 * 1024 * 1024), 100)]), limits)).rejects.toThrow(
      'the package inflates to more than 8,388,608 bytes (limits.zipMaxInflatedBytes), more than its headers declare',
    );
    const broken: PackedZipEntry = { name: Buffer.from('x.xml'), packed: Buffer.from([0xff, 0xff, 0xff, 0xff]), method: 8, size: 10, crc: 0 };
    const err = await readZipBounded(writeZip([broken]), limits).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(ZipFormatError);
    expect((err as Error).message).toMatch(/^corrupt ZIP package: an entry does not inflate \(.+\)$/);
  });
});
