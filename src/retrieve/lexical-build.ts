// Builds the in-memory lexical index (lexical-memory.ts) from one snapshot of the store's lexical index:
// statistics, row lengths, each row's collection and the postings, copied into typed arrays. The build is a
// generator that yields between slices, so a background build gives the event loop a turn now and then.

import type { LexicalSnapshot } from '../store/index.js';
import { slotOf } from './top-k.js';

export const K1 = 1.2;
export const B = 0.75;
/** Longest stretch of a background build between two turns of the event loop. */
const SLICE_MS = 15;

/** The built index: immutable once published. */
export interface LexicalIndexData {
  signature: string;
  builtAt: number;
  buildMs: number;
  nRow: number;
  avgdl: number;
  /** Row ids in ascending order, one per slot. */
  rowids: Float64Array;
  /** Collection ordinal of each slot (-1: a row with no chunk). */
  collectionOf: Int32Array;
  collections: Map<string, number>;
  /** k1 * (1 - b + b * |d| / avgdl) per slot: the length part of the BM25 denominator. */
  lengthNorm: Float64Array;
  terms: Map<string, number>;
  /** Postings of term t: [start[t], start[t + 1]). */
  start: Uint32Array;
  slot: Uint32Array;
  tfTitle: Uint16Array;
  tfHeading: Uint16Array;
  tfBody: Uint16Array;
}

type Growable = Uint32Array | Uint16Array;

/** A copy of `arr` with room for `size` elements. */
function grown<T extends Growable>(arr: T, size: number): T {
  const out = new (arr.constructor as new (n: number) => T)(size);
  out.set(arr);
  return out;
}

function bump(arr: Uint16Array, i: number): void {
  if (arr[i]! < 0xffff) arr[i] = arr[i]! + 1;
  else throw new Error('a term occurs more than 65535 times in one column of one chunk');
}

/**
 * Reads the snapshot into an index, yielding between slices; releases the snapshot however it ends (done,
 * failed, or abandoned by the caller through `return()`).
 */
export function* buildLexicalIndex(snap: LexicalSnapshot): Generator<void, LexicalIndexData, void> {
  const t0 = performance.now();
  try {
    const nRow = snap.rows;
    const avgdl = nRow > 0 ? snap.tokens / nRow : 1;
    // Iterators stay open across the yields: in the background the snapshot's connection is the build's alone.
    let sliceStart = performance.now();
    const due = (): boolean => performance.now() - sliceStart >= SLICE_MS;

    // Row lengths, in row id order: one slot per row.
    const nSizes = snap.lengthCount;
    const rowids = new Float64Array(nSizes);
    const lengthNorm = new Float64Array(nSizes);
    let nDocs = 0;
    for (const [id, d] of snap.rowLengths()) {
      rowids[nDocs] = id;
      lengthNorm[nDocs++] = K1 * (1 - B + (B * d) / avgdl);
      if ((nDocs & 1023) === 0 && due()) {
        yield;
        sliceStart = performance.now();
      }
    }
    if (nDocs !== nSizes) throw new Error('row lengths changed inside one snapshot');

    // Each slot's collection.
    const collections = new Map<string, number>();
    const collectionOf = new Int32Array(nSizes).fill(-1);
    let seenChunks = 0;
    for (const [id, name] of snap.rowCollections()) {
      const slot = slotOf(rowids, id);
      if (++seenChunks % 1024 === 0 && due()) {
        yield;
        sliceStart = performance.now();
      }
      if (slot < 0) continue;
      let c = collections.get(name);
      if (c === undefined) collections.set(name, (c = collections.size));
      collectionOf[slot] = c;
    }
    // Collections with no chunk yet still exist (an empty answer, not "cannot answer").
    for (const name of snap.collectionNames()) if (!collections.has(name)) collections.set(name, collections.size);

    // Postings: one entry per (term, row), with the term's count in each field.
    const terms = new Map<string, number>();
    let starts = new Uint32Array(1 << 16);
    let cap = 1 << 20;
    let slot = new Uint32Array(cap);
    let tfT = new Uint16Array(cap);
    let tfH = new Uint16Array(cap);
    let tfB = new Uint16Array(cap);
    let n = 0;
    let curTerm: string | null = null;
    let curRow = -1;
    let curSlot = -1;
    let rows = 0;
    for (const [term, doc, col] of snap.postings()) {
      if ((++rows & 4095) === 0 && due()) {
        yield;
        sliceStart = performance.now();
      }
      if (term !== curTerm) {
        const t = terms.size;
        terms.set(term, t);
        if (t + 2 > starts.length) starts = grown(starts, starts.length * 2);
        starts[t] = n;
        curTerm = term;
        curRow = -1;
      }
      if (doc !== curRow) {
        curRow = doc;
        curSlot = slotOf(rowids, doc);
        if (curSlot < 0) continue;
        if (n === cap) {
          cap *= 2;
          [slot, tfT, tfH, tfB] = [grown(slot, cap), grown(tfT, cap), grown(tfH, cap), grown(tfB, cap)];
        }
        slot[n] = curSlot;
        tfT[n] = 0;
        tfH[n] = 0;
        tfB[n] = 0;
        n++;
      } else if (curSlot < 0) continue;
      if (col === 'body') bump(tfB, n - 1);
      else if (col === 'title') bump(tfT, n - 1);
      else bump(tfH, n - 1);
    }
    starts[terms.size] = n;
    return {
      signature: snap.signature,
      builtAt: Date.now(),
      buildMs: performance.now() - t0,
      nRow,
      avgdl,
      rowids,
      collectionOf,
      collections,
      lengthNorm,
      terms,
      start: starts.slice(0, terms.size + 1),
      slot: slot.slice(0, n),
      tfTitle: tfT.slice(0, n),
      tfHeading: tfH.slice(0, n),
      tfBody: tfB.slice(0, n),
    };
  } finally {
    snap.release();
  }
}
