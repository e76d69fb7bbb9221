// FTS5's on-disk records, as far as BM25 needs them (SQLite's fts5_index.c): the averages record (row id 1 of
// `<table>_data`: the row count N, then each column's token total) and a docsize row (one token count per
// column). Both are sequences of SQLite varints.

/** SQLite's varint (sqlite3GetVarint): 7 bits a byte, high bit = more, the 9th byte whole. */
function readVarint(buf: Uint8Array, pos: number): [number, number] {
  let v = 0;
  for (let i = 0; i < 8; i++) {
    const byte = buf[pos + i];
    if (byte === undefined) throw new Error('truncated varint');
    v = v * 128 + (byte & 0x7f);
    if ((byte & 0x80) === 0) return [v, pos + i + 1];
  }
  const last = buf[pos + 8];
  if (last === undefined) throw new Error('truncated varint');
  return [v * 256 + last, pos + 9];
}

/** All varints of a record. */
function readVarints(buf: Uint8Array): number[] {
  const out: number[] = [];
  let pos = 0;
  while (pos < buf.length) {
    const [v, next] = readVarint(buf, pos);
    out.push(v);
    pos = next;
  }
  return out;
}

const sum = (xs: readonly number[]): number => xs.reduce((s, x) => s + x, 0);

/** The averages record: rows counted and tokens over all columns (xRowCount and xColumnTotalSize(-1)). */
export function decodeAverages(block: Uint8Array | undefined): { rows: number; tokens: number } {
  const totals = block ? readVarints(block) : [0];
  return { rows: totals[0] ?? 0, tokens: sum(totals.slice(1)) };
}

/** A docsize row: the row's tokens over all columns (xColumnSize(-1)). */
export function decodeRowLength(sz: Uint8Array): number {
  return sum(readVarints(sz));
}
