// The changing part of the in-memory lexical index (lexical-memory.ts): per collection, a list of immutable
// segments with deletion markers and one small mutable segment; over every collection, the statistics BM25 reads
// (N, the token total and each term's document frequency, all over the whole table as FTS5 counts them) and
// where each row lives.
//
// A row added or updated goes to its collection's mutable segment; a row removed is marked deleted where it is,
// and its terms leave the document frequencies at once (through the segment's forward lists). When the mutable
// segment fills it becomes an immutable segment; segments of one size tier are merged in the background (a merge
// reads only immutable data, and its result is published in one step, with any rows deleted meanwhile marked).
// Every change is applied between two queries (JavaScript runs one at a time), and a query answers only when the
// whole log up to the database's head has been applied: it never sees half a change.

import type { LexicalRowChange } from '../store/index.js';
import { NO_COLLECTION } from './lexical-build.js';
import { PendingRows } from './lexical-pending.js';
import { buildSegment, checkedTf, finish, mergeSource, type RowSource, type Segment } from './lexical-segment.js';

/** An immutable segment in use and its deletion markers. */
export interface SegmentRef {
  readonly seg: Segment;
  readonly deleted: Uint8Array;
  live: number;
}

export interface MutableRow {
  id: number;
  length: number;
  terms: Map<string, [title: number, heading: number, body: number]>;
  deleted: boolean;
}

export interface CollectionIndex {
  readonly name: string;
  segments: SegmentRef[];
  mutable: MutableRow[];
  /** Term → positions in `mutable`. */
  mutablePostings: Map<string, number[]>;
  /**
   * Bumped when the list of segments changes (a flush or a merge): the query's slot table is rebuilt then, and
   * only extended while rows are appended to the mutable segment (deletions are read from the markers).
   */
  version: number;
}

interface Location {
  col: CollectionIndex;
  /** The segment holding the row, or null for the mutable segment. */
  ref: SegmentRef | null;
  r: number;
}

export interface StateOptions {
  /** Rows the mutable segment takes before it becomes an immutable segment. */
  mutableRows: number;
  /** Segments of one size tier that are merged into one. */
  mergeFactor: number;
  /**
   * Most live rows a merge writes into one segment: a merge holds its output beside its inputs until it is
   * published, so this bounds the memory a merge adds (about 1.4 KiB a row of 120 words).
   */
  maxSegmentRows: number;
}

/** What a change log read says besides its rows: where it brings the index and the statistics there. */
export interface LexicalDeltaInfo {
  readonly head: number;
  readonly complete: boolean;
  readonly rows: number;
  readonly tokens: number;
  readonly count: number;
}

export interface MergePlan {
  col: CollectionIndex;
  inputs: SegmentRef[];
}

/**
 * Rows applied between two yields of `applyDelta` (one step between queries): the change log is read 64 rows at
 * a time too (src/store/sqlite/lexical.ts), so that what a slice reads is garbage before the event loop's turn.
 */
const APPLY_SLICE = 64;

const newRef = (seg: Segment, deleted = new Uint8Array(seg.ids.length)): SegmentRef => {
  let live = 0;
  for (let r = 0; r < seg.ids.length; r++) if (deleted[r] === 0) live++;
  return { seg, deleted, live };
};

export class LexicalState {
  readonly collections = new Map<string, CollectionIndex>();
  readonly df = new Map<string, number>();
  private readonly where = new Map<number, Location>();
  /** Rows present (must equal FTS5's N) and their tokens. */
  live = 0;
  tokens = 0;
  head = 0;
  merges = 0;
  applied = 0;

  constructor(private readonly opts: StateOptions) {}

  /** The first load: each collection's segments (at most `maxSegmentRows` rows each). */
  static fromLoad(opts: StateOptions, segments: Map<string, Segment[]>, df: Map<string, number>, head: number): LexicalState {
    const s = new LexicalState(opts);
    for (const [term, n] of df) s.df.set(term, n);
    for (const [name, list] of segments) {
      const col = s.collection(name);
      for (const seg of list) {
        if (seg.ids.length === 0) continue;
        const ref = newRef(seg);
        col.segments.push(ref);
        for (let r = 0; r < seg.ids.length; r++) {
          s.where.set(seg.ids[r]!, { col, ref, r });
          s.tokens += seg.lengths[r]!;
        }
        s.live += seg.ids.length;
      }
    }
    s.head = head;
    return s;
  }

  /** Where a row lives now. */
  locate(id: number): Readonly<Location> | undefined {
    return this.where.get(id);
  }

  collection(name: string): CollectionIndex {
    let col = this.collections.get(name);
    if (!col) this.collections.set(name, (col = { name, segments: [], mutable: [], mutablePostings: new Map(), version: 0 }));
    return col;
  }

  private dfAdd(term: string, d: number): void {
    const n = (this.df.get(term) ?? 0) + d;
    if (n > 0) this.df.set(term, n);
    else this.df.delete(term);
  }

  /** Takes a row out wherever it is; false if the index did not hold it. */
  remove(id: number): boolean {
    const at = this.where.get(id);
    if (!at) return false;
    this.where.delete(id);
    if (at.ref) {
      at.ref.deleted[at.r] = 1;
      at.ref.live--;
      for (let i = at.ref.seg.fwdStart[at.r]!; i < at.ref.seg.fwdStart[at.r + 1]!; i++) this.dfAdd(at.ref.seg.termList[at.ref.seg.fwd[i]!]!, -1);
      this.tokens -= at.ref.seg.lengths[at.r]!;
    } else {
      const row = at.col.mutable[at.r]!;
      row.deleted = true;
      for (const term of row.terms.keys()) this.dfAdd(term, -1);
      this.tokens -= row.length;
    }
    this.live--;
    return true;
  }

  /** Adds a row (after `remove` of any older version) to its collection's mutable segment. */
  add(id: number, collection: string, length: number, postings: Iterable<[string, 'title' | 'heading' | 'body']>): void {
    const col = this.collection(collection);
    const terms = new Map<string, [number, number, number]>();
    for (const [term, field] of postings) {
      let tf = terms.get(term);
      if (!tf) terms.set(term, (tf = [0, 0, 0]));
      const k = field === 'title' ? 0 : field === 'heading' ? 1 : 2;
      tf[k] = checkedTf(tf[k] + 1);
    }
    const r = col.mutable.length;
    col.mutable.push({ id, length, terms, deleted: false });
    for (const term of terms.keys()) {
      this.dfAdd(term, 1);
      let list = col.mutablePostings.get(term);
      if (!list) col.mutablePostings.set(term, (list = []));
      list.push(r);
    }
    this.where.set(id, { col, ref: null, r });
    this.live++;
    this.tokens += length;
  }

  /**
   * Applies the rows changed since `head` (each removed, then added as it is now), then checks the statistics
   * against the delta's; yields every 64 rows. A run of at least `mutableRows` rows (a large document, a
   * re-index) is not read by queries until it ends, so its rows skip the mutable segment: they are kept in flat
   * arrays (lexical-pending.ts) and become a segment every `mutableRows × mergeFactor` rows of a collection and at
   * the end. The row ids of one delta are distinct (the change log is read as the set of rows changed since).
   */
  *applyDelta(delta: LexicalDeltaInfo, changes: Iterable<LexicalRowChange>): Generator<void, void, void> {
    let i = 0;
    const long = delta.count >= this.opts.mutableRows;
    const pending = new Map<CollectionIndex, PendingRows>();
    const segmentRows = this.opts.mutableRows * this.opts.mergeFactor;
    for (const ch of changes) {
      this.remove(ch.rowId);
      if (ch.row) {
        const col = this.collection(ch.row.collection ?? NO_COLLECTION);
        if (long) {
          let rows = pending.get(col);
          if (!rows) pending.set(col, (rows = new PendingRows()));
          rows.add(ch.rowId, ch.row.length, ch.row.postings, (term) => this.dfAdd(term, 1));
          this.live++;
          this.tokens += ch.row.length;
          if (rows.count >= segmentRows) this.addSegment(col, rows.build());
        } else {
          this.add(ch.rowId, col.name, ch.row.length, ch.row.postings);
          this.flushIfFull(col);
        }
      }
      if (++i % APPLY_SLICE === 0) yield;
    }
    for (const [col, rows] of pending) if (rows.count > 0) this.addSegment(col, rows.build());
    for (const col of this.collections.values()) this.flushIfFull(col);
    if (this.live !== delta.rows || this.tokens !== delta.tokens) {
      throw new Error(`lexical statistics disagree after the change log: ${this.live} rows and ${this.tokens} tokens held, ${delta.rows} and ${delta.tokens} in FTS5`);
    }
    this.head = delta.head;
    this.applied += delta.count;
  }

  /** Puts a segment of rows already counted (live, tokens, document frequencies) into the collection. */
  private addSegment(col: CollectionIndex, seg: Segment): void {
    const ref = newRef(seg);
    col.segments.push(ref);
    for (let r = 0; r < seg.ids.length; r++) this.where.set(seg.ids[r]!, { col, ref, r });
    col.version++;
  }

  /** Turns a full mutable segment into an immutable one (a few hundred rows: done at once). */
  flushIfFull(col: CollectionIndex, force = false): void {
    if (!force && col.mutable.length < this.opts.mutableRows) return;
    const all = col.mutable.filter((m) => !m.deleted).sort((a, b) => a.id - b.id);
    // (A long run of changes applied in one step can fill it past maxSegmentRows: cut into pieces.)
    for (let at = 0; at < all.length; at += this.opts.maxSegmentRows) {
      const rows = all.slice(at, at + this.opts.maxSegmentRows);
      const src: RowSource = { count: rows.length, id: (i) => rows[i]!.id, length: (i) => rows[i]!.length, terms: (i) => mutableTerms(rows[i]!) };
      const ref = newRef(finish(buildSegment(src)));
      col.segments.push(ref);
      for (let r = 0; r < rows.length; r++) this.where.set(rows[r]!.id, { col, ref, r });
    }
    col.mutable = [];
    col.mutablePostings = new Map();
    col.version++;
  }

  /**
   * The next merge: `mergeFactor` segments of one size tier (tier = floor(log_factor(live rows / mutableRows)))
   * of one collection, smallest tier first, the smallest of the tier first and no more of them than fit in
   * `maxSegmentRows` (at least two); or one segment more than a third deleted, to reclaim it.
   */
  planMerge(): MergePlan | null {
    const f = this.opts.mergeFactor;
    const cap = this.opts.maxSegmentRows;
    for (const col of this.collections.values()) {
      const tiers = new Map<number, SegmentRef[]>();
      for (const ref of col.segments) {
        if (ref.live * 3 < ref.seg.ids.length * 2) return { col, inputs: [ref] };
        if (ref.live * 2 > cap) continue; // no merge partner would fit beside it
        const tier = Math.max(0, Math.floor(Math.log(Math.max(1, ref.live) / this.opts.mutableRows) / Math.log(f)));
        let list = tiers.get(tier);
        if (!list) tiers.set(tier, (list = []));
        list.push(ref);
      }
      for (const tier of [...tiers.keys()].sort((a, b) => a - b)) {
        const list = tiers.get(tier)!;
        if (list.length < f) continue;
        const inputs: SegmentRef[] = [];
        let rows = 0;
        for (const ref of [...list].sort((a, b) => a.live - b.live)) {
          if (inputs.length === f || rows + ref.live > cap) break;
          inputs.push(ref);
          rows += ref.live;
        }
        if (inputs.length >= 2) return { col, inputs };
      }
    }
    return null;
  }

  /** Builds a merge's segment from the inputs' live rows as they are now; yields between slices. */
  mergeBuild(plan: MergePlan): Generator<void, Segment, void> {
    return buildSegment(mergeSource(plan.inputs.map((ref) => ({ seg: ref.seg, deleted: ref.deleted.slice() }))));
  }

  /** Swaps a merge's inputs for its result in one step; rows deleted or moved during the merge are marked deleted. */
  publishMerge(plan: MergePlan, seg: Segment): void {
    const inputs = new Set(plan.inputs);
    if (!plan.inputs.every((ref) => plan.col.segments.includes(ref))) return; // the collection was reloaded meanwhile
    const first = plan.col.segments.indexOf(plan.inputs[0]!);
    plan.col.segments = plan.col.segments.filter((x) => !inputs.has(x));
    plan.col.version++;
    this.merges++;
    if (seg.ids.length === 0) return;
    const deleted = new Uint8Array(seg.ids.length);
    const ref = newRef(seg, deleted);
    for (let r = 0; r < seg.ids.length; r++) {
      const at = this.where.get(seg.ids[r]!);
      if (at && at.ref && inputs.has(at.ref)) this.where.set(seg.ids[r]!, { col: plan.col, ref, r });
      else {
        deleted[r] = 1;
        ref.live--;
      }
    }
    plan.col.segments.splice(Math.min(first, plan.col.segments.length), 0, ref);
  }

  stats(): { segments: number; mutableRows: number; postings: number; deletedRows: number } {
    let segments = 0;
    let mutableRows = 0;
    let postings = 0;
    let deletedRows = 0;
    for (const col of this.collections.values()) {
      segments += col.segments.length;
      mutableRows += col.mutable.length;
      for (const ref of col.segments) {
        postings += ref.seg.local.length;
        deletedRows += ref.seg.ids.length - ref.live;
      }
    }
    return { segments, mutableRows, postings, deletedRows };
  }
}

function* mutableTerms(row: MutableRow): Generator<[string, number, number, number]> {
  for (const [term, tf] of row.terms) yield [term, tf[0], tf[1], tf[2]];
}

