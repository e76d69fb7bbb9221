// Scoring one query over one collection of the in-memory lexical index (lexical-memory.ts says why and which
// formula): each term's postings in every segment (skipping rows marked deleted) and in the mutable segment,
// accumulated per row in a scratch array, then the best `limit` by a bounded heap. The whole query runs in one
// synchronous call, so it sees one state of the index from start to end.

import type { FtsWeights } from '../store/index.js';
import { B, K1 } from './lexical-build.js';
import type { CollectionIndex, LexicalState } from './lexical-state.js';
import { topK } from './top-k.js';

/** A column weight as the FTS5 path hands it to bm25() (six decimals, else 1: store/sqlite/chunks.ts). */
function ftsWeight(x: number): number {
  return Number.isFinite(x) && x >= 0 ? Number(x.toFixed(6)) : 1;
}

/** A collection's rows as one run of slots: each segment's rows from its base, then the mutable segment's. */
interface Layout {
  version: number;
  bases: number[];
  mutableBase: number;
  /** Chunk id of each slot; room for more mutable rows past `size`. */
  ids: Float64Array;
  size: number;
}

/** A query term as the index spells it (undefined: an empty phrase) and how often the query repeats it. */
export interface ScoredTerm {
  term: string | undefined;
  count: number;
}

export function createScorer(): {
  /** Bytes of the per-query scratch arrays. */
  scratchBytes(): number;
  score(s: LexicalState, col: CollectionIndex, stat: { rows: number; tokens: number }, phrases: readonly ScoredTerm[], limit: number, w: FtsWeights, allowed?: ReadonlySet<number>): { chunkId: number; score: number }[];
} {
  const layouts = new WeakMap<CollectionIndex, Layout>();
  // Scratch space for one query, grown to the largest collection.
  let acc = new Float64Array(0);
  let seen = new Uint8Array(0);
  let mask = new Uint8Array(0);
  let touched = new Uint32Array(0);

  const layoutOf = (col: CollectionIndex): Layout => {
    const had = layouts.get(col);
    let out: Layout;
    if (had && had.version === col.version && had.mutableBase + col.mutable.length <= had.ids.length) {
      // Only rows appended to the mutable segment since: write their ids into the room left.
      for (let r = had.size - had.mutableBase; r < col.mutable.length; r++) had.ids[had.mutableBase + r] = col.mutable[r]!.id;
      had.size = had.mutableBase + col.mutable.length;
      out = had;
    } else {
      const bases: number[] = [];
      let n = 0;
      for (const ref of col.segments) {
        bases.push(n);
        n += ref.seg.ids.length;
      }
      const size = n + col.mutable.length;
      const ids = new Float64Array(size + Math.max(64, col.mutable.length, Math.ceil(size / 64)));
      col.segments.forEach((ref, k) => ids.set(ref.seg.ids, bases[k]));
      col.mutable.forEach((m, r) => (ids[n + r] = m.id));
      out = { version: col.version, bases, mutableBase: n, ids, size };
      layouts.set(col, out);
    }
    if (acc.length < out.size) {
      const size = Math.ceil(out.size * 1.25);
      acc = new Float64Array(size);
      seen = new Uint8Array(size);
      mask = new Uint8Array(size);
      touched = new Uint32Array(size);
    }
    return out;
  };

  return {
    scratchBytes: () => acc.length * (8 + 1 + 1 + 4),
    score(s, col, stat, phrases, limit, w, allowed) {
      const statRows = stat.rows;
      const wt = ftsWeight(w.title);
      const wh = ftsWeight(w.heading);
      const wb = ftsWeight(w.body);
      const avgdl = statRows > 0 ? stat.tokens / statRows : 1;
      const lay = layoutOf(col);
      // The length part of the denominator, k1 * (1 - b + b * |d| / avgdl), as c0 + c1 * |d|: worked out per
      // posting rather than cached per row, since avgdl moves with every change (a cache would be recomputed for
      // every row of the collection after each one). Equal to the formula to about 1e-16 relative.
      const c0 = K1 * (1 - B);
      const c1 = (K1 * B) / avgdl;
      if (allowed) {
        for (const id of allowed) {
          const at = s.locate(id);
          if (!at || at.col !== col) continue;
          mask[at.ref ? lay.bases[col.segments.indexOf(at.ref)]! + at.r : lay.mutableBase + at.r] = 1;
        }
      }
      let nTouched = 0;
      const hit = (slot: number, f: number, norm: number, mult: number): void => {
        if (seen[slot] === 0) {
          seen[slot] = 1;
          touched[nTouched++] = slot;
        }
        acc[slot] = acc[slot]! + (mult * (f * (K1 + 1))) / (f + norm);
      };
      try {
        for (let i = 0; i < phrases.length; i++) {
          const toks = phrases[i]!.term;
          if (toks === undefined) continue; // an empty phrase matches nothing and adds nothing
          const term = toks;
          const nHit = s.df.get(term) ?? 0;
          if (nHit === 0) continue;
          let idf = Math.log((statRows - nHit + 0.5) / (nHit + 0.5));
          if (idf <= 0) idf = 1e-6;
          const mult = phrases[i]!.count * idf;
          col.segments.forEach((ref, k) => {
            const seg = ref.seg;
            const t = seg.terms.get(term);
            if (t === undefined) return;
            const base = lay.bases[k]!;
            const lengths = seg.lengths;
            for (let p = seg.start[t]!; p < seg.start[t + 1]!; p++) {
              const r = seg.local[p]!;
              if (ref.deleted[r] !== 0) continue;
              if (allowed && mask[base + r] === 0) continue;
              hit(base + r, wt * seg.tfTitle[p]! + wh * seg.tfHeading[p]! + wb * seg.tfBody[p]!, c0 + c1 * lengths[r]!, mult);
            }
          });
          for (const r of col.mutablePostings.get(term) ?? []) {
            const row = col.mutable[r]!;
            if (row.deleted || (allowed && mask[lay.mutableBase + r] === 0)) continue;
            const tf = row.terms.get(term)!;
            hit(lay.mutableBase + r, wt * tf[0] + wh * tf[1] + wb * tf[2], c0 + c1 * row.length, mult);
          }
        }
        return topK(touched, nTouched, acc, lay.ids, limit);
      } finally {
        for (let i = 0; i < nTouched; i++) {
          const slot = touched[i]!;
          acc[slot] = 0;
          seen[slot] = 0;
        }
        if (allowed) mask.fill(0, 0, lay.size);
      }
    },
  };
}
