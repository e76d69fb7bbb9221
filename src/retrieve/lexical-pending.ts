// Rows of a long run of lexical changes on their way into a segment (lexical-state.ts, applyDelta). A short run
// goes through the mutable segment, which queries read row by row; a long run (a large document's chunks, a
// re-index) is applied while queries are answered elsewhere (FTS5, or the index as it was), so its rows need not
// be readable until the run ends. They are kept here in flat arrays, about 32 bytes a distinct term of a row
// (2.5 KiB a row of 120 words) where the mutable segment's per-row term maps take about 10 KiB, and become one
// segment when enough have come. Those maps, alive across the event loop's turns while queries allocated, were
// promoted to V8's old generation and stayed there as garbage until its next full collection.

import { buildSegment, checkedTf, finish, type RowSource, type Segment } from './lexical-segment.js';

export class PendingRows {
  private readonly ids: number[] = [];
  private readonly lengths: number[] = [];
  /** Row r's terms are terms[ends[r - 1] ?? 0 .. ends[r]), with their counts in the title, heading and body. */
  private readonly ends: number[] = [];
  private terms: string[] = [];
  private tfTitle: number[] = [];
  private tfHeading: number[] = [];
  private tfBody: number[] = [];

  get count(): number {
    return this.ids.length;
  }

  /** Adds a row; calls `onTerm` once for each distinct term of it. */
  add(id: number, length: number, postings: Iterable<[string, 'title' | 'heading' | 'body']>, onTerm: (term: string) => void): void {
    // Where each term of this row sits in the flat arrays (short-lived: dropped with the row's postings).
    const at = new Map<string, number>();
    for (const [term, field] of postings) {
      let k = at.get(term);
      if (k === undefined) {
        k = this.terms.length;
        at.set(term, k);
        this.terms.push(term);
        this.tfTitle.push(0);
        this.tfHeading.push(0);
        this.tfBody.push(0);
        onTerm(term);
      }
      if (field === 'title') this.tfTitle[k] = checkedTf(this.tfTitle[k]! + 1);
      else if (field === 'heading') this.tfHeading[k] = checkedTf(this.tfHeading[k]! + 1);
      else this.tfBody[k] = checkedTf(this.tfBody[k]! + 1);
    }
    this.ids.push(id);
    this.lengths.push(length);
    this.ends.push(this.terms.length);
  }

  /** The rows as one segment (by ascending chunk id, as a segment keeps them); the rows are let go. */
  build(): Segment {
    const order = this.ids.map((_, r) => r).sort((a, b) => this.ids[a]! - this.ids[b]!);
    const { ids, lengths, ends, terms, tfTitle, tfHeading, tfBody } = this;
    const src: RowSource = {
      count: order.length,
      id: (i) => ids[order[i]!]!,
      length: (i) => lengths[order[i]!]!,
      *terms(i) {
        const r = order[i]!;
        for (let k = r === 0 ? 0 : ends[r - 1]!; k < ends[r]!; k++) yield [terms[k]!, tfTitle[k]!, tfHeading[k]!, tfBody[k]!];
      },
    };
    const seg = finish(buildSegment(src));
    this.ids.length = 0;
    this.lengths.length = 0;
    this.ends.length = 0;
    this.terms = [];
    this.tfTitle = [];
    this.tfHeading = [];
    this.tfBody = [];
    return seg;
  }
}
