/**
 * The best `limit` of the first `n` slots in `touched` by score (`acc[slot]`), ties to the lower row id, best
 * first: a bounded min-heap, so the cost is n log(limit) however many slots were touched.
 */
export function topK(touched: Uint32Array, n: number, acc: Float64Array, rowids: Float64Array, limit: number): { chunkId: number; score: number }[] {
  const k = Math.min(limit, n);
  const heap = new Uint32Array(k);
  let size = 0;
  // "a is worse than b": lower score, or equal score and higher row id.
  const worse = (a: number, b: number): boolean => acc[a]! < acc[b]! || (acc[a] === acc[b] && rowids[a]! > rowids[b]!);
  const swap = (i: number, j: number): void => {
    const tmp = heap[i]!;
    heap[i] = heap[j]!;
    heap[j] = tmp;
  };
  const down = (i: number): void => {
    for (;;) {
      const l = 2 * i + 1;
      const r = l + 1;
      let m = i;
      if (l < size && worse(heap[l]!, heap[m]!)) m = l;
      if (r < size && worse(heap[r]!, heap[m]!)) m = r;
      if (m === i) return;
      swap(i, m);
      i = m;
    }
  };
  for (let i = 0; i < n; i++) {
    const slot = touched[i]!;
    if (size < k) {
      let j = size++;
      heap[j] = slot;
      while (j > 0) {
        const parent = (j - 1) >> 1;
        if (!worse(heap[j]!, heap[parent]!)) break;
        swap(j, parent);
        j = parent;
      }
    } else if (k > 0 && worse(heap[0]!, slot)) {
      heap[0] = slot;
      down(0);
    }
  }
  const out = Array.from(heap.subarray(0, size));
  out.sort((a, b) => (worse(a, b) ? 1 : worse(b, a) ? -1 : 0));
  return out.map((slot) => ({ chunkId: rowids[slot]!, score: acc[slot]! }));
}

/** Position of a row id in ascending `rowids` (binary search), or -1. */
export function slotOf(rowids: Float64Array, id: number): number {
  let lo = 0;
  let hi = rowids.length - 1;
  while (lo <= hi) {
    const mid = (lo + hi) >>> 1;
    const v = rowids[mid]!;
    if (v === id) return mid;
    if (v < id) lo = mid + 1;
    else hi = mid - 1;
  }
  return -1;
}
