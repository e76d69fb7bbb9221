// Ranking metrics over graded relevance judgments (TREC qrels: gain > 0 is relevant).

/** docId → gain for one query. */
export type Judgments = ReadonlyMap<string, number>;

/**
 * nDCG@k, Järvelin and Kekäläinen (ACM TOIS 2002), in the form trec_eval's ndcg_cut uses:
 * DCG@k = sum_{i=1..k} gain_i / log2(i + 1), with linear gains; IDCG@k is the DCG of the judged
 * documents sorted by gain. A query with no relevant document scores 0.
 */
export function ndcgAt(ranking: readonly string[], judged: Judgments, k: number): number {
  let dcg = 0;
  ranking.slice(0, k).forEach((doc, i) => {
    const g = judged.get(doc) ?? 0;
    if (g > 0) dcg += g / Math.log2(i + 2);
  });
  const ideal = [...judged.values()].filter((g) => g > 0).sort((a, b) => b - a).slice(0, k);
  const idcg = ideal.reduce((s, g, i) => s + g / Math.log2(i + 2), 0);
  return idcg > 0 ? dcg / idcg : 0;
}

/**
 * Average precision at depth k as in the TREC evaluation conventions (trec_eval "map" with a 1000-deep
 * run): the mean over ALL relevant documents of the precision at each relevant document's rank; relevant
 * documents not retrieved contribute 0.
 */
export function averagePrecision(ranking: readonly string[], judged: Judgments, k = 1000): number {
  const relevant = [...judged.values()].filter((g) => g > 0).length;
  if (relevant === 0) return 0;
  let hits = 0;
  let sum = 0;
  ranking.slice(0, k).forEach((doc, i) => {
    if ((judged.get(doc) ?? 0) > 0) {
      hits++;
      sum += hits / (i + 1);
    }
  });
  return sum / relevant;
}

/** Share of the relevant documents found in the first k. */
export function recallAt(ranking: readonly string[], judged: Judgments, k: number): number {
  const relevant = [...judged.values()].filter((g) => g > 0).length;
  if (relevant === 0) return 0;
  const found = ranking.slice(0, k).filter((d) => (judged.get(d) ?? 0) > 0).length;
  return found / relevant;
}

/** Reciprocal rank of the first relevant document within the first k (0 if none). */
export function reciprocalRankAt(ranking: readonly string[], judged: Judgments, k: number): number {
  const i = ranking.slice(0, k).findIndex((d) => (judged.get(d) ?? 0) > 0);
  return i < 0 ? 0 : 1 / (i + 1);
}

export interface RetrievalScores {
  'ndcg@10': number;
  map: number;
  'recall@10': number;
  'recall@100': number;
  'mrr@10': number;
  queries: number;
}

/** Means of every metric over the queries that have at least one relevant judgment. */
export function scoreRun(runs: ReadonlyMap<string, readonly string[]>, qrels: ReadonlyMap<string, Judgments>): RetrievalScores {
  const acc = { ndcg: 0, map: 0, r10: 0, r100: 0, mrr: 0, n: 0 };
  for (const [qid, judged] of qrels) {
    if (![...judged.values()].some((g) => g > 0)) continue;
    const ranking = runs.get(qid) ?? [];
    acc.ndcg += ndcgAt(ranking, judged, 10);
    acc.map += averagePrecision(ranking, judged, 1000);
    acc.r10 += recallAt(ranking, judged, 10);
    acc.r100 += recallAt(ranking, judged, 100);
    acc.mrr += reciprocalRankAt(ranking, judged, 10);
    acc.n++;
  }
  const mean = (x: number): number => (acc.n > 0 ? round4(x / acc.n) : 0);
  return {
    'ndcg@10': mean(acc.ndcg),
    map: mean(acc.map),
    'recall@10': mean(acc.r10),
    'recall@100': mean(acc.r100),
    'mrr@10': mean(acc.mrr),
    queries: acc.n,
  };
}

function round4(x: number): number {
  return Math.round(x * 10_000) / 10_000;
}
