// Reciprocal rank fusion, Cormack, Clarke and Buettcher (SIGIR 2009):
//   RRFscore(d) = sum over rankings r of  w_r / (k + r(d)),  ranks 1-based, k = 60 in the paper.
// Per-ranking weights w_r generalise the paper's unweighted sum (w_r = 1 reproduces it).

export interface RankedList {
  name: string;
  ids: readonly number[];
  weight?: number;
}

export interface FusedItem {
  id: number;
  score: number;
  /** 1-based rank of the item in each list that contained it. */
  ranks: Record<string, number>;
}

export function reciprocalRankFusion(lists: readonly RankedList[], k = 60): FusedItem[] {
  const fused = new Map<number, FusedItem>();
  for (const list of lists) {
    const w = list.weight ?? 1;
    const seen = new Set<number>();
    list.ids.forEach((id, i) => {
      if (seen.has(id)) return; // a duplicate in one ranking counts once, at its best rank
      seen.add(id);
      const rank = i + 1;
      const item = fused.get(id) ?? { id, score: 0, ranks: {} };
      item.score += w / (k + rank);
      item.ranks[list.name] = rank;
      fused.set(id, item);
    });
  }
  // Ties broken by id so the order is deterministic.
  return [...fused.values()].sort((a, b) => b.score - a.score || a.id - b.id);
}
