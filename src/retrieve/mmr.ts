// Maximal marginal relevance, Carbonell and Goldstein (SIGIR 1998):
//   MMR = argmax over remaining d of  λ * rel(d) − (1 − λ) * max over selected s of sim(d, s)
// with rel scaled to [0, 1] over the candidates so it is comparable with a cosine similarity. Candidates
// whose similarity to an already selected one reaches `duplicateAt` are dropped outright: a near-copy of a
// passage (a repeated clause, an overlapping chunk) adds nothing to an answer's sources.

export interface MmrOptions {
  lambda: number;
  duplicateAt: number;
}

export const DEFAULT_MMR: MmrOptions = { lambda: 0.7, duplicateAt: 0.95 };

export interface MmrItem<T> {
  item: T;
  relevance: number;
}

/** Reorders `items` (best first) by MMR and drops near-duplicates; returns at most `k`. */
export function mmrSelect<T>(
  items: readonly MmrItem<T>[],
  similarity: (a: T, b: T) => number,
  k: number,
  opts: MmrOptions = DEFAULT_MMR,
): T[] {
  if (items.length === 0 || k <= 0) return [];
  const max = Math.max(...items.map((x) => x.relevance));
  const min = Math.min(...items.map((x) => x.relevance));
  const span = max - min || 1;
  const rel = items.map((x) => (x.relevance - min) / span);
  const maxSim = new Float64Array(items.length); // to the selected set so far
  const open = new Set(items.map((_, i) => i));
  const picked: T[] = [];
  while (picked.length < k && open.size > 0) {
    let best = -1;
    let bestScore = -Infinity;
    for (const i of open) {
      const s = opts.lambda * rel[i]! - (1 - opts.lambda) * maxSim[i]!;
      if (s > bestScore) {
        bestScore = s;
        best = i;
      }
    }
    open.delete(best);
    const chosen = items[best]!.item;
    picked.push(chosen);
    for (const i of [...open]) {
      const sim = similarity(items[i]!.item, chosen);
      if (sim >= opts.duplicateAt) open.delete(i);
      else if (sim > maxSim[i]!) maxSim[i] = sim;
    }
  }
  return picked;
}

/** Jaccard overlap of two word sets: the similarity used when no vectors are at hand. */
export function jaccard(a: ReadonlySet<string>, b: ReadonlySet<string>): number {
  if (a.size === 0 && b.size === 0) return 1;
  let both = 0;
  for (const x of a) if (b.has(x)) both++;
  return both / (a.size + b.size - both);
}
