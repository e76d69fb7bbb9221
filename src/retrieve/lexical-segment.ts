// Segments of the in-memory lexical index (lexical-memory.ts): an immutable inverted index over some rows of one
// collection, with a forward list of each row's terms, so a deletion can take the row's share out of the global
// document frequencies without reading the database. Segments are written once (from the first load, from the
// mutable segment when it fills, or by merging) and never changed; deletions are markers kept beside them.
//
// A segment is built in two passes over its rows (count, then fill), so it is allocated at its final size: a
// merge of large segments holds the inputs and one output, never per-term growing arrays.

/** One row's postings: term, then its occurrences in the title, heading and body fields. */
export type RowTerms = Iterable<[term: string, title: number, heading: number, body: number]>;

export interface Segment {
  /** Chunk ids of the rows, ascending; a row's position here is its local id. */
  readonly ids: Float64Array;
  /** Tokens of each row over all fields (|d|). */
  readonly lengths: Uint32Array;
  readonly termList: readonly string[];
  readonly terms: ReadonlyMap<string, number>;
  /** Postings of term t: [start[t], start[t + 1]), by ascending local id. */
  readonly start: Uint32Array;
  readonly local: Uint32Array;
  readonly tfTitle: Uint16Array;
  readonly tfHeading: Uint16Array;
  readonly tfBody: Uint16Array;
  /** Terms of row r: fwd[fwdStart[r], fwdStart[r + 1]) are term ids. */
  readonly fwdStart: Uint32Array;
  readonly fwd: Uint32Array;
}

const MAX_TF = 0xffff;

export function checkedTf(n: number): number {
  if (n > MAX_TF) throw new Error('a term occurs more than 65535 times in one field of one chunk');
  return n;
}

/** The position of row `r` in term t's postings, or -1 (postings are sorted by local id). */
export function postingOf(seg: Segment, t: number, r: number): number {
  let lo = seg.start[t]!;
  let hi = seg.start[t + 1]! - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >>> 1;
    const v = seg.local[mid]!;
    if (v === r) return mid;
    if (v < r) lo = mid + 1;
    else hi = mid - 1;
  }
  return -1;
}

/** Each term of row `r` with its field counts. */
export function* rowTerms(seg: Segment, r: number): Generator<[string, number, number, number]> {
  for (let i = seg.fwdStart[r]!; i < seg.fwdStart[r + 1]!; i++) {
    const t = seg.fwd[i]!;
    const p = postingOf(seg, t, r);
    yield [seg.termList[t]!, seg.tfTitle[p]!, seg.tfHeading[p]!, seg.tfBody[p]!];
  }
}

/** Rows to build a segment from, in ascending chunk id order; `terms(i)` may be called twice per row. */
export interface RowSource {
  readonly count: number;
  id(i: number): number;
  length(i: number): number;
  terms(i: number): RowTerms;
}

/** Builds a segment, yielding every `every` rows of each pass (a background merge gives the event loop a turn). */
export function* buildSegment(src: RowSource, every = 256): Generator<void, Segment, void> {
  const n = src.count;
  const ids = new Float64Array(n);
  const lengths = new Uint32Array(n);
  const terms = new Map<string, number>();
  const termList: string[] = [];
  let counts = new Uint32Array(1024);
  const fwdStart = new Uint32Array(n + 1);
  // Pass 1: the dictionary, postings per term and terms per row.
  for (let i = 0; i < n; i++) {
    ids[i] = src.id(i);
    lengths[i] = src.length(i);
    if (i > 0 && ids[i]! <= ids[i - 1]!) throw new Error('segment rows out of order');
    let k = 0;
    for (const [term] of src.terms(i)) {
      let t = terms.get(term);
      if (t === undefined) {
        t = termList.length;
        terms.set(term, t);
        termList.push(term);
        if (t >= counts.length) {
          const grown = new Uint32Array(counts.length * 2);
          grown.set(counts);
          counts = grown;
        }
      }
      counts[t] = counts[t]! + 1;
      k++;
    }
    fwdStart[i + 1] = fwdStart[i]! + k;
    if ((i + 1) % every === 0) yield;
  }
  const nTerms = termList.length;
  const start = new Uint32Array(nTerms + 1);
  for (let t = 0; t < nTerms; t++) start[t + 1] = start[t]! + counts[t]!;
  const total = start[nTerms]!;
  const local = new Uint32Array(total);
  const tfTitle = new Uint16Array(total);
  const tfHeading = new Uint16Array(total);
  const tfBody = new Uint16Array(total);
  const fwd = new Uint32Array(total);
  const fill = start.slice(0, nTerms);
  // Pass 2: rows in ascending order, so each term's postings come out sorted by local id.
  for (let i = 0; i < n; i++) {
    let f = fwdStart[i]!;
    for (const [term, tt, th, tb] of src.terms(i)) {
      const t = terms.get(term)!;
      const p = fill[t]!;
      fill[t] = p + 1;
      local[p] = i;
      tfTitle[p] = checkedTf(tt);
      tfHeading[p] = checkedTf(th);
      tfBody[p] = checkedTf(tb);
      fwd[f++] = t;
    }
    if ((i + 1) % every === 0) yield;
  }
  return { ids, lengths, termList, terms, start, local, tfTitle, tfHeading, tfBody, fwdStart, fwd };
}

/** Runs a build generator to its end. */
export function finish<T>(gen: Generator<void, T, void>): T {
  for (;;) {
    const r = gen.next();
    if (r.done) return r.value;
  }
}

/** The live rows of `inputs` (those not marked in `deleted`) as one row source, by ascending chunk id. */
export function mergeSource(inputs: readonly { seg: Segment; deleted: Uint8Array }[]): RowSource {
  const rows: { seg: Segment; r: number; id: number }[] = [];
  for (const { seg, deleted } of inputs) for (let r = 0; r < seg.ids.length; r++) if (deleted[r] === 0) rows.push({ seg, r, id: seg.ids[r]! });
  rows.sort((a, b) => a.id - b.id);
  return {
    count: rows.length,
    id: (i) => rows[i]!.id,
    length: (i) => rows[i]!.seg.lengths[rows[i]!.r]!,
    terms: (i) => rowTerms(rows[i]!.seg, rows[i]!.r),
  };
}
