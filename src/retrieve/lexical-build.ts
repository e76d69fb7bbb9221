// The first load of the in-memory lexical index (lexical-memory.ts) from one snapshot of the store's lexical
// index: statistics, row lengths, each row's collection and the postings, copied into typed arrays, then cut
// into one segment per collection (lexical-segment.ts). Later changes are applied from the store's change log;
// this runs once per process (and again only if the log no longer reaches back to what the index holds).
// The build is a generator that yields between slices, so a background build gives the event loop a turn.

import type { LexicalSnapshot } from '../store/index.js';
import { buildSegment, type RowSource, type Segment } from './lexical-segment.js';
import { slotOf } from './top-k.js';

export const K1 = 1.2;
export const B = 0.75;
/** Longest stretch of a background build between two turns of the event loop. */
const SLICE_MS = 15;

/** The built index: immutable once published. */
export interface LexicalIndexData {
  signature: string;
  /** The store's lexical change log position the snapshot was read at. */
  head: number;
  builtAt: number;
  buildMs: number;
  nRow: number;
  /** Tokens over every row (FTS5's averages record). */
  tokens: number;
  avgdl: number;
  /** Row ids in ascending order, one per slot. */
  rowids: Float64Array;
  /** Collection ordinal of each slot (-1: a row with no chunk). */
  collectionOf: Int32Array;
  collections: Map<string, number>;
  /** Tokens of each slot's row over all fields (|d|). */
  lengths: Uint32Array;
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
    const lengths = new Uint32Array(nSizes);
    let nDocs = 0;
    for (const [id, d] of snap.rowLengths()) {
      rowids[nDocs] = id;
      lengths[nDocs++] = d;
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
      head: snap.head,
      builtAt: Date.now(),
      buildMs: performance.now() - t0,
      nRow,
      tokens: snap.tokens,
      avgdl,
      rowids,
      collectionOf,
      collections,
      lengths,
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

/** The rows of no collection (an index row whose chunk is gone: it still counts in FTS5's statistics). */
export const NO_COLLECTION = '\u0000';

/**
 * Cuts a whole-table index into one segment per collection (rows of no collection under NO_COLLECTION), plus
 * every term's document frequency over the whole table, which BM25's idf reads.
 */
export function* splitByCollection(data: LexicalIndexData, maxRows = Infinity): Generator<void, { segments: Map<string, Segment[]>; df: Map<string, number> }, void> {
  const nSlots = data.rowids.length;
  const nTerms = data.terms.size;
  const termList: string[] = new Array<string>(nTerms);
  for (const [term, t] of data.terms) termList[t] = term;
  const df = new Map<string, number>();
  for (let t = 0; t < nTerms; t++) df.set(termList[t]!, data.start[t + 1]! - data.start[t]!);
  // A forward list per slot: its postings, in term order.
  const fwdStart = new Uint32Array(nSlots + 1);
  for (let p = 0; p < data.slot.length; p++) {
    const at = data.slot[p]! + 1;
    fwdStart[at] = fwdStart[at]! + 1;
  }
  for (let i = 0; i < nSlots; i++) fwdStart[i + 1] = fwdStart[i + 1]! + fwdStart[i]!;
  const fill = fwdStart.slice(0, nSlots);
  const fwdTerm = new Uint32Array(data.slot.length);
  const fwdPosting = new Uint32Array(data.slot.length);
  for (let t = 0; t < nTerms; t++) {
    for (let p = data.start[t]!; p < data.start[t + 1]!; p++) {
      const s = data.slot[p]!;
      const at = fill[s]!;
      fill[s] = at + 1;
      fwdTerm[at] = t;
      fwdPosting[at] = p;
    }
    if ((t & 4095) === 4095) yield;
  }
  const names = new Map<number, string>();
  for (const [name, c] of data.collections) names.set(c, name);
  const bySlot = new Map<string, number[]>();
  for (const name of data.collections.keys()) bySlot.set(name, []);
  for (let s = 0; s < nSlots; s++) {
    const c = data.collectionOf[s]!;
    const name = c < 0 ? NO_COLLECTION : names.get(c)!;
    let list = bySlot.get(name);
    if (!list) bySlot.set(name, (list = []));
    list.push(s);
  }
  const segments = new Map<string, Segment[]>();
  for (const [name, all] of bySlot) {
    const list: Segment[] = [];
    segments.set(name, list);
    // Segments of at most `maxRows` rows, so that no later merge needs a second copy of a large one.
    const pieces = Math.max(1, Math.ceil(all.length / maxRows));
    for (let k = 0; k < pieces; k++) {
      const slots = all.slice(Math.floor((k * all.length) / pieces), Math.floor(((k + 1) * all.length) / pieces));
      const src: RowSource = {
        count: slots.length,
        id: (i) => data.rowids[slots[i]!]!,
        length: (i) => data.lengths[slots[i]!]!,
        *terms(i) {
          const s = slots[i]!;
          for (let at = fwdStart[s]!; at < fwdStart[s + 1]!; at++) {
            const p = fwdPosting[at]!;
            yield [termList[fwdTerm[at]!]!, data.tfTitle[p]!, data.tfHeading[p]!, data.tfBody[p]!];
          }
        },
      };
      list.push(yield* buildSegment(src));
    }
  }
  return { segments, df };
}
