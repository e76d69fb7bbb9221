import type { Embedder } from '../embed/types.js';
import { SourceboundError } from '../errors.js';
import type { Repository, VectorIndexes, FtsWeights, ChunkView } from '../store/index.js';
import type { SearchHit, SearchMode } from '../types.js';
import { toMatchExpression } from './query-text.js';
import { reciprocalRankFusion } from './rrf.js';

export interface RetrieverOptions {
  candidates: number;
  rrfK: number;
  lexicalWeight: number;
  denseWeight: number;
  fieldWeights: FtsWeights;
}

export interface RetrieveRequest {
  query: string;
  collection: string;
  k: number;
  mode: SearchMode;
}

export interface Retriever {
  search(req: RetrieveRequest): Promise<SearchHit[]>;
}

// Field weights for FTS5 bm25(): FTS5 sums w_col * tf_col per term before the BM25 saturation, so these
// act like BM25F field boosts. Neutral until tuned on CISI (retrieval-quality work).
export const DEFAULT_FIELD_WEIGHTS: FtsWeights = { title: 1, heading: 1, body: 1 };

export function createRetriever(deps: {
  repo: Repository;
  indexes: VectorIndexes;
  embedder: Embedder;
  options: RetrieverOptions;
}): Retriever {
  const { repo, indexes, embedder, options } = deps;

  const lexical = (collection: string, query: string, limit: number): { id: number; score: number }[] => {
    const match = toMatchExpression(query);
    if (!match) return [];
    return repo.searchFts(collection, match, limit, options.fieldWeights).map((r) => ({ id: r.chunkId, score: r.score }));
  };

  const dense = async (collection: string, vector: Float32Array | null, limit: number): Promise<{ id: number; score: number }[]> => {
    if (!vector) return [];
    return indexes.search(collection, vector, limit).map((h) => ({ id: h.chunkId, score: h.score }));
  };

  return {
    async search(req) {
      const col = repo.getCollection(req.collection);
      if (!col) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [req.collection]);
      const wantsDense = req.mode !== 'lexical';
      if (wantsDense && col.embedderId && col.embedderId !== embedder.id) {
        throw new SourceboundError('SB_ERR_EMBEDDER_MISMATCH', [req.collection, col.embedderId, embedder.id]);
      }
      // Another process (a CLI ingest) may have changed the collection since the last query.
      if (wantsDense) indexes.sync(req.collection);
      const limit = Math.max(req.k, options.candidates);
      const queryVector = wantsDense ? ((await embedder.embed([req.query]))[0] ?? null) : null;
      const [lex, den] = await Promise.all([
        req.mode === 'dense' ? Promise.resolve([]) : Promise.resolve(lexical(req.collection, req.query, limit)),
        wantsDense ? dense(req.collection, queryVector, limit) : Promise.resolve([]),
      ]);
      const denseScore = new Map(den.map((d) => [d.id, d.score]));
      let ranked: { id: number; score: number; ranks: { lexical?: number; dense?: number } }[];
      if (req.mode === 'lexical') ranked = lex.map((r, i) => ({ id: r.id, score: r.score, ranks: { lexical: i + 1 } }));
      else if (req.mode === 'dense') ranked = den.map((r, i) => ({ id: r.id, score: r.score, ranks: { dense: i + 1 } }));
      else {
        ranked = reciprocalRankFusion(
          [
            { name: 'lexical', ids: lex.map((r) => r.id), weight: options.lexicalWeight },
            { name: 'dense', ids: den.map((r) => r.id), weight: options.denseWeight },
          ],
          options.rrfK,
        );
      }
      const top = ranked.slice(0, req.k);
      const views = repo.chunkViews(top.map((t) => t.id));
      if (queryVector) {
        // Lexical-only hits get their cosine too, from the stored vectors, so that answer-time evidence
        // checks see one comparable similarity for every hit.
        const missing = [...views.values()].filter((v) => !denseScore.has(v.chunkId));
        const vecs = repo.getVectors(embedder.id, missing.map((v) => v.chunkHash));
        for (const v of missing) {
          const vec = vecs.get(v.chunkHash);
          if (vec) denseScore.set(v.chunkId, dot(queryVector, vec));
        }
      }
      const hits: SearchHit[] = [];
      for (const t of top) {
        const v = views.get(t.id);
        if (!v) continue; // deleted between search and lookup
        hits.push(toHit(v, t.score, t.ranks, denseScore.get(t.id)));
      }
      return hits;
    },
  };
}

function toHit(v: ChunkView, score: number, ranks: { lexical?: number; dense?: number }, denseScore?: number): SearchHit {
  const hit: SearchHit = {
    chunkId: v.chunkId,
    documentId: v.documentId,
    source: v.source,
    title: v.title,
    page: v.pageStart,
    pageEnd: v.pageEnd,
    section: v.headingPath.join(' > '),
    headingPath: v.headingPath,
    text: v.text,
    start: v.start,
    end: v.end,
    effectiveDate: v.effectiveDate,
    score,
    ranks,
  };
  if (denseScore !== undefined) hit.denseScore = denseScore;
  return hit;
}

function dot(a: Float32Array, b: Float32Array): number {
  let s = 0;
  const n = Math.min(a.length, b.length);
  for (let i = 0; i < n; i++) s += a[i]! * b[i]!;
  return s;
}
