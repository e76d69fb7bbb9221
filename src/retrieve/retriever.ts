import type { Embedder } from '../embed/types.js';
import { SourceboundError } from '../errors.js';
import { dot } from '../numbers.js';
import type { Repository, VectorIndexes, FtsWeights, ChunkView } from '../store/index.js';
import type { RetrieveRequest, SearchHit } from '../types.js';
import { isEmptyFilter, type RetrieveFilter } from './filter.js';
import { createLexicalMemory, type LexicalMemory } from './lexical-memory.js';
import { DEFAULT_MMR, jaccard, mmrSelect, type MmrOptions } from './mmr.js';
import { phraseCounts, queryTerms, termCounts, toWeightedMatch, type WeightedTerm } from './query-text.js';
import { DEFAULT_RM3, rm3Expand, type Rm3Options } from './rm3.js';
import { reciprocalRankFusion } from './rrf.js';
import type { SynonymSource } from './wordnet.js';

export interface RetrieverOptions {
  candidates: number;
  rrfK: number;
  lexicalWeight: number;
  denseWeight: number;
  fieldWeights: FtsWeights;
  /** Most times one query term is repeated to carry its weight into FTS5 (1 = every term counts once). */
  termRepeat?: number;
  /** Most repeats of one term in the RM3 query, whose weights are spread over more terms (default termRepeat × 3). */
  rm3Repeat?: number;
  /** Pseudo-relevance feedback on the lexical leg; null turns it off, undefined takes the default. */
  rm3?: Rm3Options | null;
  /** Weight of WordNet synonyms relative to the word they expand; null (the default) adds none. */
  synonymWeight?: number | null;
  /**
   * Rocchio feedback on the dense leg in hybrid mode: the query vector plus this weight times the mean vector
   * of the top lexical hits (as many as RM3 uses, else 10). null turns it off.
   */
  denseFeedback?: number | null;
  /** Diversity step over the fused list; null (the default) keeps the fused order. */
  mmr?: MmrOptions | null;
  /**
   * Who scores the lexical leg: FTS5's bm25() per matching row, or the in-memory index (lexical-memory.ts),
   * which ranks the same and falls back to FTS5 whenever it cannot answer. Default here "fts5"; the service's
   * config (`retrieval.lexicalEngine`) defaults to "memory".
   */
  lexicalEngine?: LexicalEngine;
}

export type LexicalEngine = 'fts5' | 'memory';

export type { RetrieveRequest };

export interface Retriever {
  search(req: RetrieveRequest): Promise<SearchHit[]>;
}

// Field weights for FTS5 bm25(): FTS5 sums w_col * tf_col per term before the BM25 saturation, so these act
// like BM25F field boosts. Chosen by a sweep on CISI (docs/benchmarks.md); Cranfield never tuned on.
export const DEFAULT_FIELD_WEIGHTS: FtsWeights = { title: 2, heading: 1, body: 1 };

/** Settings the service runs with when the caller leaves them out; each chosen by measurement on CISI. */
export const DEFAULT_TUNING = {
  termRepeat: 6,
  rm3: DEFAULT_RM3 as Rm3Options | null,
  synonymWeight: null as number | null,
  denseFeedback: 1 as number | null,
  mmr: null as MmrOptions | null,
};

/** The `retrieval` section of the config, as far as the retriever reads it. */
export interface RetrievalSettings {
  candidates: number;
  rrfK: number;
  lexicalWeight: number;
  denseWeight: number;
  termRepeat: number;
  rm3: { enabled: boolean } & Rm3Options;
  synonymWeight: number;
  denseFeedback: number;
  mmr: { enabled: boolean } & MmrOptions;
  fieldWeights: FtsWeights;
  lexicalEngine: LexicalEngine;
}

/** Retriever options from the config section (0 and enabled: false turn a step off). */
export function retrieverOptions(c: RetrievalSettings): RetrieverOptions {
  return {
    candidates: c.candidates,
    rrfK: c.rrfK,
    lexicalWeight: c.lexicalWeight,
    denseWeight: c.denseWeight,
    fieldWeights: { title: c.fieldWeights.title, heading: c.fieldWeights.heading, body: c.fieldWeights.body },
    termRepeat: c.termRepeat,
    rm3: c.rm3.enabled ? { docs: c.rm3.docs, terms: c.rm3.terms, originalWeight: c.rm3.originalWeight } : null,
    synonymWeight: c.synonymWeight > 0 ? c.synonymWeight : null,
    denseFeedback: c.denseFeedback > 0 ? c.denseFeedback : null,
    mmr: c.mmr.enabled ? { lambda: c.mmr.lambda, duplicateAt: c.mmr.duplicateAt } : null,
    lexicalEngine: c.lexicalEngine,
  };
}

interface Scored {
  id: number;
  score: number;
}

export function createRetriever(deps: {
  repo: Repository;
  indexes: VectorIndexes;
  embedder: Embedder;
  options: RetrieverOptions;
  /** Needed only when options.synonymWeight is set. */
  synonyms?: SynonymSource;
  /**
   * The in-memory lexical index, when options.lexicalEngine is "memory" (the service passes one that builds
   * in the background); without it the retriever makes one that builds inside the first query.
   */
  lexicalIndex?: LexicalMemory;
}): Retriever {
  const { repo, indexes, embedder, options } = deps;
  const termRepeat = options.termRepeat ?? DEFAULT_TUNING.termRepeat;
  const rm3 = options.rm3 === undefined ? DEFAULT_TUNING.rm3 : options.rm3;
  const synonymWeight = options.synonymWeight === undefined ? DEFAULT_TUNING.synonymWeight : options.synonymWeight;
  const mmr = options.mmr === undefined ? DEFAULT_TUNING.mmr : options.mmr;
  const denseFeedback = options.denseFeedback === undefined ? DEFAULT_TUNING.denseFeedback : options.denseFeedback;
  const memory = (options.lexicalEngine ?? 'fts5') === 'memory' ? (deps.lexicalIndex ?? createLexicalMemory(repo)) : null;

  // Rocchio (1971): move the query vector toward the centroid of the top lexical hits, whose stored vectors
  // are at hand, so the dense leg searches near what BM25 already found relevant rather than near the bare
  // question alone. The centroid is weighted by the hits' lexical scores (as RM3 weights its feedback
  // documents): when one passage matches the question and the rest only matched expansion terms, the
  // vector moves toward that passage, not toward the crowd.
  const feedbackVector = (collection: string, query: Float32Array, top: readonly Scored[]): Float32Array => {
    if (!denseFeedback) return query;
    const fb = top.slice(0, rm3?.docs ?? 10);
    // Through the vector index's cache when it offers one: the top hits of popular questions recur.
    const ids = fb.map((r) => r.id);
    const vecs = indexes.vectors ? indexes.vectors(collection, ids) : repo.chunkVectors(embedder.id, ids);
    if (vecs.size === 0) return query;
    const min = Math.min(...fb.map((r) => r.score));
    const weightOf = new Map(fb.map((r) => [r.id, r.score - Math.min(0, min) + 1e-9]));
    let total = 0;
    for (const id of vecs.keys()) total += weightOf.get(id) ?? 0;
    const out = Float32Array.from(query);
    for (const [id, v] of vecs) {
      const w = (denseFeedback * (weightOf.get(id) ?? 0)) / total;
      for (let i = 0; i < out.length; i++) out[i] = out[i]! + w * v[i]!;
    }
    let norm = 0;
    for (let i = 0; i < out.length; i++) norm += out[i]! * out[i]!;
    norm = Math.sqrt(norm) || 1;
    for (let i = 0; i < out.length; i++) out[i] = out[i]! / norm;
    return out;
  };

  const queryWeights = (query: string): Map<string, number> => {
    const counts = termCounts(query);
    if (synonymWeight && synonymWeight > 0 && deps.synonyms) {
      for (const [t, n] of [...counts]) {
        for (const s of deps.synonyms.synonyms(t)) if (!counts.has(s)) counts.set(s, n * synonymWeight);
      }
    }
    return counts;
  };

  const ftsSearch = (collection: string, terms: WeightedTerm[], repeat: number, limit: number, filter?: RetrieveFilter, allowed?: ReadonlySet<number>, useMemory = true): Scored[] => {
    if (memory && useMemory) {
      // The same repeat counts as the MATCH expression below, as multipliers; null = ask FTS5 instead.
      const hits = memory.search(collection, phraseCounts(terms, { maxRepeat: repeat }), limit, options.fieldWeights, filter ? allowed : undefined);
      if (hits) return hits.map((h) => ({ id: h.chunkId, score: h.score }));
    }
    const match = toWeightedMatch(terms, { maxRepeat: repeat });
    if (!match) return [];
    return repo.searchFts(collection, match, limit, options.fieldWeights, filter).map((r) => ({ id: r.chunkId, score: r.score }));
  };

  const lexical = (collection: string, query: string, limit: number, filter?: RetrieveFilter, allowed?: ReadonlySet<number>, useMemory = true): Scored[] => {
    const weights = queryWeights(query);
    const terms = [...weights].map(([term, weight]) => ({ term, weight }));
    const first = ftsSearch(collection, terms, termRepeat, rm3 ? Math.max(limit, rm3.docs) : limit, filter, allowed, useMemory);
    if (!rm3 || first.length === 0) return first.slice(0, limit);
    const texts = repo.chunkTexts(first.slice(0, rm3.docs).map((r) => r.id));
    const feedback = first.slice(0, rm3.docs).flatMap((r) => {
      const text = texts.get(r.id);
      return text !== undefined ? [{ text, score: r.score }] : [];
    });
    // The expanded query spreads weight over many terms; a finer repeat scale keeps their proportions.
    return ftsSearch(collection, rm3Expand(weights, feedback, rm3), options.rm3Repeat ?? termRepeat * 3, limit, filter, allowed, useMemory);
  };

  const dense = (collection: string, vector: Float32Array | null, limit: number, allowed?: ReadonlySet<number>): Scored[] => {
    if (!vector) return [];
    return indexes.search(collection, vector, limit, allowed).map((h) => ({ id: h.chunkId, score: h.score }));
  };

  const search = async (req: RetrieveRequest, useMemory = true): Promise<SearchHit[]> => {
    // A long run of changes being applied to the in-memory index (a full re-index's switch): wait for it, for a
    // bounded time, rather than run FTS5 beside it and starve it (docs/architecture.md). First, so that what is
    // read below (the collection's state, a filter's chunk ids) is read after it.
    const pending = memory && useMemory && req.mode !== 'dense' ? memory.waitForWork() : null;
    if (pending) await pending;
    // One primary-key lookup per query (no counts): it gives the generation the vector index checks too.
    const col = repo.collectionState(req.collection);
    if (!col) throw new SourceboundError('SB_ERR_UNKNOWN_COLLECTION', [req.collection]);
    const wantsDense = req.mode !== 'lexical';
    if (wantsDense && col.embedderId && col.embedderId !== embedder.id) {
      throw new SourceboundError('SB_ERR_EMBEDDER_MISMATCH', [req.collection, col.embedderId, embedder.id]);
    }
    // Another process (a CLI ingest) may have changed the collection since the last query. Only memory
    // is brought up to date here: writing index files is the writer's job, not a query's.
    if (wantsDense) indexes.sync(req.collection, { persist: false, generation: col.generation });
    const filter = isEmptyFilter(req.filter) ? undefined : req.filter;
    // One allowed-id set for both legs when the in-memory lexical index filters inside its search too.
    const allowed = filter && (wantsDense || (memory && req.mode !== 'dense')) ? repo.chunkIdsMatching(req.collection, filter) : undefined;
    const limit = Math.max(req.k, options.candidates);
    const queryVector = wantsDense ? ((await embedder.embed([req.query]))[0] ?? null) : null;
    const lex = req.mode === 'dense' ? [] : lexical(req.collection, req.query, limit, filter, allowed, useMemory);
    const denseQuery = queryVector && req.mode === 'hybrid' && lex.length > 0 ? feedbackVector(req.collection, queryVector, lex) : queryVector;
    const den = wantsDense ? dense(req.collection, denseQuery, limit, allowed) : [];
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
    const diversify = req.diversify ?? mmr !== null;
    const pool = diversify ? ranked.slice(0, Math.max(req.k * 4, 50)) : ranked.slice(0, req.k);
    const views = repo.chunkViews(pool.map((t) => t.id));
    // In-memory indexes that a large change has just made stale (a full re-index swaps every chunk id; each
    // index catches up within moments) can name chunks that are gone. When most of a result is gone, the
    // lexical leg is asked of FTS5 instead, which reads the database itself.
    if (useMemory && memory && req.mode !== 'dense' && pool.length > 0 && views.size * 2 < pool.length) return search(req, false);
    const vectors = queryVector || diversify ? repo.getVectors(embedder.id, [...views.values()].map((v) => v.chunkHash)) : new Map<string, Float32Array>();
    if (queryVector) {
      // Lexical-only hits get their cosine too, from the stored vectors, so that answer-time evidence
      // checks see one comparable similarity for every hit.
      for (const v of views.values()) {
        const vec = vectors.get(v.chunkHash);
        if (!denseScore.has(v.chunkId) && vec) denseScore.set(v.chunkId, dot(queryVector, vec));
      }
    }
    let top = pool;
    if (diversify) top = diversifyPool(pool, views, vectors, req.k, mmr ?? DEFAULT_MMR);
    const hits: SearchHit[] = [];
    for (const t of top) {
      const v = views.get(t.id);
      if (!v) continue; // deleted between search and lookup
      hits.push(toHit(v, t.score, t.ranks, denseScore.get(t.id)));
    }
    return hits;
  };
  return { search: (req) => search(req) };
}

function diversifyPool<T extends { id: number; score: number }>(
  pool: readonly T[],
  views: ReadonlyMap<number, ChunkView>,
  vectors: ReadonlyMap<string, Float32Array>,
  k: number,
  opts: MmrOptions,
): T[] {
  const words = new Map<number, Set<string>>();
  const wordsOf = (id: number): Set<string> => {
    let w = words.get(id);
    if (!w) {
      w = new Set(queryTerms(views.get(id)?.text ?? ''));
      words.set(id, w);
    }
    return w;
  };
  const vecOf = (id: number): Float32Array | undefined => {
    const h = views.get(id)?.chunkHash;
    return h === undefined ? undefined : vectors.get(h);
  };
  const sim = (a: T, b: T): number => {
    const va = vecOf(a.id);
    const vb = vecOf(b.id);
    return va && vb ? dot(va, vb) : jaccard(wordsOf(a.id), wordsOf(b.id));
  };
  return mmrSelect(pool.map((item) => ({ item, relevance: item.score })), sim, k, opts);
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
    version: v.version ?? null,
    score,
    ranks,
  };
  if (v.pageBreaks.length > 0) hit.pageBreaks = v.pageBreaks;
  if (denseScore !== undefined) hit.denseScore = denseScore;
  return hit;
}
