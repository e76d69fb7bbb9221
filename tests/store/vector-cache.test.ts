import { describe, expect, it } from 'vitest';
import { exactSearch, readThrough, VectorCache } from '../../src/store/vector-cache.js';
import { mulberry32 } from '../fixtures/random.js';

// The filter's vector cache is bounded (limits.vectorCacheMb): full, it lets its longest-held entry go. Exactness
// must not depend on what it holds: the exact scan scores every allowed id, from the cache or from the store.

const DIMS = 8;

function unit(rnd: () => number): Float32Array {
  const v = Float32Array.from({ length: DIMS }, () => rnd() * 2 - 1);
  const n = Math.hypot(...v);
  return v.map((x) => x / n);
}

describe('VectorCache', () => {
  it('never holds more than its bound, keeps the newest entries, and reads back what it holds', () => {
    const rnd = mulberry32(3);
    const cache = new VectorCache(DIMS, 2, 4);
    const vectors = new Map<number, Float32Array>();
    for (let id = 1; id <= 10; id++) {
      vectors.set(id, unit(rnd));
      cache.set(id, vectors.get(id)!);
      expect(cache.size).toBe(Math.min(id, 4));
      expect(cache.bytes).toBeLessThanOrEqual(4 * DIMS * 4);
    }
    expect([1, 2, 3, 4, 5, 6].some((id) => cache.has(id))).toBe(false);
    for (const id of [7, 8, 9, 10]) expect(Array.from(cache.get(id)!)).toEqual(Array.from(vectors.get(id)!));
    // Setting an id it holds replaces the vector and takes no room from another.
    cache.set(9, vectors.get(1)!);
    expect(cache.size).toBe(4);
    expect(Array.from(cache.get(9)!)).toEqual(Array.from(vectors.get(1)!));
    expect(cache.has(7)).toBe(true);
  });

  it('grows its storage only up to the bound', () => {
    const cache = new VectorCache(DIMS, 1, 3);
    for (let id = 0; id < 50; id++) cache.set(id, new Float32Array(DIMS).fill(id));
    expect(cache.bytes).toBe(3 * DIMS * 4);
    expect(Array.from(cache.get(49)!)).toEqual(new Array(DIMS).fill(49));
  });
});

describe('exactSearch with a bounded cache', () => {
  it('ranks exactly as a scan without a cache, whatever the cache held or let go during the scan', () => {
    const rnd = mulberry32(11);
    const store = new Map<number, Float32Array>();
    for (let id = 0; id < 300; id++) store.set(id, unit(rnd));
    const read = (ids: number[]): Map<number, Float32Array> => new Map(ids.map((id) => [id, store.get(id)!]));
    for (const bound of [1, 7, 50, 1000]) {
      const cache = new VectorCache(DIMS, 4, bound);
      for (let q = 0; q < 40; q++) {
        const query = unit(rnd);
        // Overlapping allowed sets, so a scan both hits and misses the cache and pushes out entries it then needs.
        const ids = [...store.keys()].filter(() => rnd() < 0.2);
        const want = exactSearch(ids, query, 10, null, read);
        const got = exactSearch(ids, query, 10, cache, read);
        expect(got.map((h) => h.chunkId), `bound ${bound}, query ${q}`).toEqual(want.map((h) => h.chunkId));
        got.forEach((h, i) => expect(h.score).toBeCloseTo(want[i]!.score, 6));
        expect(cache.size).toBeLessThanOrEqual(bound);
      }
    }
  });
});

describe('readThrough', () => {
  it('returns the stored vectors in ascending id order, reads only what the cache lacks, and keeps only what it may', () => {
    const rnd = mulberry32(5);
    const store = new Map<number, Float32Array>();
    for (let id = 0; id < 40; id++) store.set(id, unit(rnd));
    const asked: number[][] = [];
    const read = (ids: number[]): Map<number, Float32Array> => {
      asked.push(ids);
      return new Map(ids.filter((id) => store.has(id)).map((id) => [id, store.get(id)!]));
    };
    const cache = new VectorCache(DIMS, 4, 6);
    const first = readThrough(cache, [30, 2, 17, 2, 99], read, (id) => id !== 17);
    expect([...first.keys()]).toEqual([2, 17, 30]);
    for (const [id, v] of first) expect(Array.from(v)).toEqual(Array.from(store.get(id)!));
    expect(asked).toEqual([[2, 17, 30, 99]]);
    expect([cache.has(2), cache.has(17), cache.has(30)]).toEqual([true, false, true]);
    const second = readThrough(cache, [30, 17, 2], read, () => true);
    expect([...second.keys()]).toEqual([2, 17, 30]);
    expect(asked[1]).toEqual([17]);
    // What it returns is a copy: pushing entries out of the cache afterwards does not change it.
    for (let id = 0; id < 12; id++) cache.set(100 + id, unit(rnd));
    expect(Array.from(second.get(2)!)).toEqual(Array.from(store.get(2)!));
  });
});
