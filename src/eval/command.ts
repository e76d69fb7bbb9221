// `sourcebound eval retrieval | answers | fit`: the measuring commands. Options are read by the command-line
// library (src/cli/program.ts builds the tree); each handler prints a table, or one JSON object with --json.

import { existsSync, mkdirSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { Option, type Command } from 'commander';
import { readAnswerModel } from '../answer/index.js';
import { CliError, EXIT, usageError, type CliContext } from '../cli/context.js';
import { collectList, numberIn, requireOptions, wholeNumber } from '../cli/options.js';
import { DEFAULT_RM3 } from '../retrieve/index.js';
import { openStore, storePaths } from '../store/index.js';
import type { SearchMode } from '../types.js';
import { evaluateAnswers, readQuestions, writeFeatures, type AnswerEvalReport, type QuestionOutcome } from './answers.js';
import { fitAnswerModels, modelModule, readEvidence, type FitResult } from './fit.js';
import { evaluateRetrieval, type RetrievalTuning } from './retrieval.js';

type Run = (fn: (...args: never[]) => Promise<number> | number) => (...args: unknown[]) => Promise<void>;

/** Adds `eval` and its sub-commands to `parent`; `run` records each handler's exit code. */
export function addEvalCommands(parent: Command, ctx: CliContext, run: Run): void {
  const evalCmd = parent
    .command('eval')
    .summary('measure retrieval and answers, fit the answer models')
    .description('Measures retrieval on a test collection and answers on a labelled question set, and fits the answer models.');

  evalCmd
    .command('retrieval')
    .summary('measure retrieval on a test collection (TREC qrels)')
    .description('Measures retrieval on a test collection: corpus and queries are JSONL ({id, title?, text}), qrels are TREC format (qid 0 docid grade).')
    .usage('(--corpus F | --collection C) --queries F --qrels F [options]')
    .option('--corpus <file>', 'the documents (JSONL), ingested into a throw-away store')
    .option('--collection <name>', "rank this collection of the configured data folder's store instead (a document is its source name without the extension)")
    .option('--queries <file>', 'the queries (JSONL)')
    .option('--qrels <file>', 'relevance judgements (TREC qrels)')
    .addOption(new Option('--mode <mode>', 'which retrieval to measure').choices(['hybrid', 'lexical', 'dense']).default('hybrid'))
    .addOption(new Option('--k <n>', 'results per query').argParser(wholeNumber(1, 10_000)).default(1000))
    .option('--run <file>', 'also write a TREC run file')
    .addOption(new Option('--rm3 <on|off>', "pseudo-relevance feedback (default: the configuration's)").choices(['on', 'off']))
    .addOption(new Option('--synonyms <weight>', 'WordNet synonym weight, 0 turns it off').argParser(numberIn(0, 10)))
    .addOption(new Option('--dense-weight <weight>', 'weight of the dense leg in fusion').argParser(numberIn(0, 10)))
    .addOption(new Option('--lexical-engine <engine>', 'who scores the BM25 leg').choices(['fts5', 'memory']))
    .option('--json', 'one JSON object with ndcg@10, map, recall@10, recall@100, mrr@10, queries')
    .action(run((opts: RetrievalOptions) => retrievalCommand(ctx, opts)));

  evalCmd
    .command('answers')
    .summary('measure answers on a labelled question set')
    .description(
      'Asks every question of a labelled set through the real pipeline (a throw-away store) and scores the replies. ' +
        'One JSON object a line: id, question, answerable, doc, page, section, must_contain[], must_contain_any[], ' +
        'must_not_contain[], follow_up_of, kind, collection (docs/eval-answers.md).',
    )
    .usage('--questions F [options]')
    .option('--questions <file>', 'the question set (JSONL)')
    .option('--docs <dir>', 'the documents; when questions name a collection, DIR holds one folder per collection (default: a docs/ folder beside the question file; else, when the questions name collections, the folders the store remembers for them; else the seed folder)')
    .option('--extractive', 'answer offline even when a completion endpoint is configured')
    .addOption(new Option('--limit <n>', 'only the first N questions').argParser(wholeNumber(1)))
    .option('--features <file>', 'write each question\'s evidence as JSONL (for `eval fit`)')
    .option('--corpus <name>', "the corpus name recorded with --features (default: the question file's folder)")
    .option('--model <file>', 'answer with this fitted model (e.g. one written by `eval fit`)')
    .option('--json', 'one JSON object: totals, per-kind results, reliability table')
    .option('-v, --verbose', 'list every miss (with --json: every outcome)')
    .action(run((opts: AnswersOptions) => answersCommand(ctx, opts)));

  evalCmd
    .command('fit')
    .summary('fit the answer models on labelled sets, leave-one-corpus-out')
    .description(
      'Fits the answer models (sentence ranker, answer/abstain decision, confidence calibration) from the evidence ' +
        'that `eval answers --features F` recorded, one file per corpus, leave-one-corpus-out: ' +
        "each corpus's figures come from models fitted on the others. Needs at least two corpora.",
    )
    .usage('--features F[,F...] [options]')
    .option('--features <files>', 'a features file (repeat, or separate with commas)', collectList)
    .option('--out-dir <dir>', 'write model.json (all corpora), model-without-<corpus>.json and report.json')
    .option('--module <file>', 'also write the model as the TypeScript module the service ships (fitted-model.ts)')
    .option('--json', 'print the held-out figures as JSON')
    .action(run((opts: FitOptions) => fitCommand(ctx, opts)));
}

interface RetrievalOptions {
  corpus?: string;
  collection?: string;
  queries?: string;
  qrels?: string;
  mode: SearchMode;
  k: number;
  run?: string;
  rm3?: 'on' | 'off';
  synonyms?: number;
  denseWeight?: number;
  lexicalEngine?: 'fts5' | 'memory';
  json?: boolean;
}

async function retrievalCommand(ctx: CliContext, opts: RetrievalOptions): Promise<number> {
  requireOptions(opts, opts.collection === undefined ? ['corpus', 'queries', 'qrels'] : ['queries', 'qrels']);
  if (opts.corpus !== undefined && opts.collection !== undefined) throw usageError('give --corpus (a throw-away store) or --collection (the configured store), not both');
  const tuning: RetrievalTuning = {};
  if (opts.rm3 !== undefined) tuning.rm3 = opts.rm3 === 'on' ? DEFAULT_RM3 : null;
  if (opts.synonyms !== undefined) tuning.synonymWeight = opts.synonyms === 0 ? null : opts.synonyms;
  if (opts.denseWeight !== undefined) tuning.denseWeight = opts.denseWeight;
  if (opts.lexicalEngine !== undefined) tuning.lexicalEngine = opts.lexicalEngine;
  const result = await evaluateRetrieval({
    ...(opts.corpus !== undefined ? { corpus: opts.corpus } : {}),
    ...(opts.collection !== undefined ? { collection: opts.collection } : {}),
    queries: opts.queries!,
    qrels: opts.qrels!,
    mode: opts.mode,
    depth: opts.k,
    env: ctx.env,
    overrides: ctx.overrides(),
    ...(opts.run ? { runFile: opts.run } : {}),
    tuning,
    onProgress: (m) => {
      if (!opts.json) ctx.io.err(`${m}\n`);
    },
  });
  if (opts.json) {
    ctx.io.out(`${JSON.stringify(result)}\n`);
    return EXIT.ok;
  }
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
  ctx.io.out(`${rows.map(([k, v]) => `${k.padEnd(12)}${v}`).join('\n')}\n`);
  return EXIT.ok;
}

/**
 * Without --docs, a question set that names collections (one written by `feedback export`, say) is scored
 * against the folders those collections were ingested from, as the configured store remembers them. Null when
 * the set names no collection; an error that says what to do when the store cannot tell.
 */
function storeFolders(ctx: CliContext, questionsFile: string): Map<string, string[]> | null {
  let named: string[];
  try {
    named = [...new Set(readQuestions(questionsFile).map((q) => q.collection).filter((c): c is string => c !== null))];
  } catch {
    return null; // evaluateAnswers reads the file again and reports what is wrong with it
  }
  if (named.length === 0) return null;
  const { database } = storePaths(ctx.config().dataDir);
  const fix = 'give --docs DIR with one folder per collection';
  if (!existsSync(database)) throw new CliError(`the questions name collections (${named.join(', ')}) and there is no store at ${database} to find their documents in; ${fix}`);
  const store = openStore(database, { readonly: true });
  try {
    const out = new Map<string, string[]>();
    for (const c of named) {
      const roots = store.listSourceRoots(c).map((r) => r.root).filter((r) => existsSync(r));
      if (roots.length === 0) throw new CliError(`the questions name collection "${c}", and the store at ${database} remembers no folder for it; ${fix}`);
      out.set(c, roots);
    }
    ctx.io.err(`scoring against the folders the store remembers: ${[...out].map(([c, r]) => `${c}: ${r.join(', ')}`).join('; ')}\n`);
    return out;
  } finally {
    store.close();
  }
}

interface AnswersOptions {
  questions?: string;
  docs?: string;
  extractive?: boolean;
  limit?: number;
  features?: string;
  corpus?: string;
  model?: string;
  json?: boolean;
  verbose?: boolean;
}

async function answersCommand(ctx: CliContext, opts: AnswersOptions): Promise<number> {
  if (opts.model !== undefined) {
    try {
      readAnswerModel(opts.model);
    } catch (err) {
      throw usageError((err as Error).message);
    }
  }
  requireOptions(opts, ['questions']);
  const questions = opts.questions!;
  if (!existsSync(questions)) throw usageError(`no question file at ${questions}`);
  const beside = path.join(path.dirname(questions), 'docs');
  const docs = opts.docs ?? (existsSync(beside) ? beside : (storeFolders(ctx, questions) ?? ctx.config().seed.path));
  const { io } = ctx;
  let r: AnswerEvalReport;
  try {
    r = await evaluateAnswers({
      questions,
      docs,
      env: ctx.env,
      extractive: opts.extractive ?? false,
      explain: opts.features !== undefined,
      overrides: { ...ctx.overrides(), ...(opts.model !== undefined ? { answer: { modelFile: path.resolve(opts.model) } } : {}) },
      ...(opts.limit !== undefined ? { limit: opts.limit } : {}),
      onProgress: (done, total) => {
        if (io.errIsTTY && (done % 25 === 0 || done === total)) io.err(`\ranswered ${done}/${total}${done === total ? '\n' : ''}`);
      },
    });
  } catch (err) {
    throw new CliError((err as Error).message);
  }
  if (opts.features) writeFeatures(opts.features, opts.corpus ?? path.basename(path.dirname(path.resolve(questions))), readQuestions(questions), r.outcomes);
  const missed = (o: QuestionOutcome): boolean => o.correct === false || (!o.answerable && !o.abstained) || o.injectionOk === false;
  if (opts.json) {
    const { outcomes, ...summary } = r;
    const slim = outcomes.map(({ explanation: _e, ...o }) => o);
    io.out(`${JSON.stringify(opts.verbose ? { ...summary, outcomes: slim } : { ...summary, missed: outcomes.filter(missed).map((o) => o.id) })}\n`);
    return EXIT.ok;
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
  if (opts.verbose) {
    for (const o of r.outcomes.filter(missed)) {
      lines.push(`  miss ${o.id} [${o.kind}] abstained=${o.abstained} cited=${o.cited.join(',')} :: ${o.answer.slice(0, 160).replace(/\n/g, ' ')}`);
    }
  }
  io.out(`${lines.join('\n')}\n`);
  return EXIT.ok;
}

interface FitOptions {
  features?: string[];
  outDir?: string;
  module?: string;
  json?: boolean;
}

function fitCommand(ctx: CliContext, opts: FitOptions): number {
  const files = opts.features ?? [];
  if (files.length === 0) throw usageError('give at least two --features files');
  let result: FitResult;
  try {
    result = fitAnswerModels(readEvidence(files));
  } catch (err) {
    throw new CliError((err as Error).message);
  }
  const report = { model: result.model, heldOut: result.heldOut.map((h) => h.figures) };
  if (opts.outDir) {
    mkdirSync(opts.outDir, { recursive: true });
    writeFileSync(path.join(opts.outDir, 'model.json'), `${JSON.stringify(result.model, null, 1)}\n`);
    for (const h of result.heldOut) writeFileSync(path.join(opts.outDir, `model-without-${h.corpus}.json`), `${JSON.stringify(h.model, null, 1)}\n`);
    writeFileSync(path.join(opts.outDir, 'report.json'), `${JSON.stringify(report, null, 1)}\n`);
  }
  if (opts.module) writeFileSync(opts.module, modelModule(result.model, `sourcebound eval fit --features ${files.map((f) => path.basename(f)).join(',')} --module ${path.basename(opts.module)}`));
  if (opts.json) {
    ctx.io.out(`${JSON.stringify(report)}\n`);
    return EXIT.ok;
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
  ctx.io.out(`${lines.join('\n')}\n`);
  return EXIT.ok;
}
