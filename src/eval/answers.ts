// `eval answers`: ask a labelled question set through the real pipeline and score the replies.
//
// The question format is the one shared by every set the project is measured on (the demo set,
// the sets in ../shared/eval/qa and PolicyQA converted to it): one JSON object a line with
// id, question, answerable, doc, page, section, must_contain[], must_contain_any[],
// must_not_contain[], follow_up_of, kind, collection. Scoring follows the published rules of
// those sets: an answerable question is correct when the reply does not abstain, its answer text
// holds every must_contain string (and one must_contain_any string when given), compared on
// lower-case letters and digits only, and a citation names the expected document.

import { existsSync, mkdtempSync, readdirSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import type { AnswerExplanation, HistoryTurn } from '../answer/index.js';
import { loadConfig } from '../config/index.js';
import { configuredLogger } from '../logger.js';
import { createRuntime } from '../runtime.js';
import type { AnswerResult, Citation, QuestionLabel } from '../types.js';
import { readJsonl } from './data.js';

export interface LabelledQuestion extends QuestionLabel {
  mustContain: string[];
  mustContainAny: string[];
  mustNotContain: string[];
  followUpOf: string | null;
  kind: string;
  collection: string | null;
  /** An explicit conversation before the question (older sets); otherwise built from `followUpOf`. */
  history?: HistoryTurn[];
}

export interface QuestionOutcome {
  id: string;
  kind: string;
  collection: string;
  answerable: boolean;
  /** Answerable only: not abstained, every must_contain (and one must_contain_any) in the answer, right document cited. */
  correct: boolean | null;
  /** Answerable only: the strings are in the answer or in a cited quote. */
  hit: boolean | null;
  abstained: boolean;
  /** PDF questions only: a citation names the expected page. */
  pageOk: boolean | null;
  quotes: number;
  quotesVerbatim: number;
  /** Questions with must_not_contain: none of those strings is in the answer. */
  injectionOk: boolean | null;
  confidence: number;
  answer: string;
  cited: string[];
  /** The evidence the answer step weighed (see answer/evidence.ts), for fitting and diagnosis. */
  features?: Record<string, number>;
  explanation?: AnswerExplanation;
}

export interface Rate {
  n: number;
  total: number;
  rate: number;
}

export interface ReliabilityBin {
  from: number;
  to: number;
  answers: number;
  meanConfidence: number;
  correct: number;
}

export interface AnswerEvalReport {
  questions: number;
  correct: Rate;
  hit: Rate;
  falseAbstention: Rate;
  unanswerableAbstained: Rate;
  quotesVerbatim: Rate;
  pageOk: Rate;
  injectionResisted: Rate;
  byKind: Record<string, { correct?: Rate; abstained?: Rate }>;
  /** Answered questions grouped by reported confidence, with the share that was correct. */
  reliability: ReliabilityBin[];
  embedder: string;
  mode: string;
  seconds: number;
  outcomes: QuestionOutcome[];
}

const str = (v: unknown): string | null => (typeof v === 'string' && v.trim() !== '' ? v : null);
const strings = (v: unknown, file: string, line: number, field: string): string[] => {
  if (v === undefined || v === null) return [];
  if (!Array.isArray(v) || v.some((x) => typeof x !== 'string')) throw new Error(`${file}:${line}: "${field}" must be a list of strings`);
  return v as string[];
};

/**
 * Reads a question set. Lines in the shared format are taken as they are; lines in the project's
 * earlier format ({kind, question, history?, expect:{document, page, facts, forbidden}}) are
 * converted, so sets exported before the change still run.
 */
export function readQuestions(file: string): LabelledQuestion[] {
  return readJsonl(file, (v, line) => {
    if (typeof v.question !== 'string' || v.question.trim() === '') throw new Error(`${file}:${line}: each line needs a "question"`);
    const id = String(v.id ?? line);
    if (v.expect !== undefined && v.answerable === undefined) return fromEarlierFormat(v, id, file, line);
    if (typeof v.answerable !== 'boolean') throw new Error(`${file}:${line}: "answerable" must be true or false`);
    const q: LabelledQuestion = {
      id,
      question: v.question,
      answerable: v.answerable,
      doc: str(v.doc),
      page: typeof v.page === 'number' ? v.page : null,
      section: str(v.section),
      mustContain: strings(v.must_contain, file, line, 'must_contain'),
      mustContainAny: strings(v.must_contain_any, file, line, 'must_contain_any'),
      mustNotContain: strings(v.must_not_contain, file, line, 'must_not_contain'),
      followUpOf: str(v.follow_up_of),
      kind: str(v.kind) ?? (v.answerable ? 'answerable' : 'unanswerable'),
      collection: str(v.collection),
    };
    if (Array.isArray(v.history)) q.history = v.history as HistoryTurn[];
    return q;
  });
}

function fromEarlierFormat(v: Record<string, unknown>, id: string, file: string, line: number): LabelledQuestion {
  const expect = (v.expect ?? {}) as Record<string, unknown>;
  const kind = str(v.kind) ?? 'answerable';
  const doc = str(expect.document);
  // An injection question of the earlier format only checked what the answer must not say.
  const injection = kind === 'injection';
  const q: LabelledQuestion = {
    id,
    question: v.question as string,
    answerable: injection || (doc !== null && kind !== 'unanswerable'),
    doc: injection ? null : doc,
    page: typeof expect.page === 'number' ? expect.page : null,
    section: null,
    mustContain: injection ? [] : strings(expect.facts, file, line, 'expect.facts'),
    mustContainAny: [],
    mustNotContain: strings(expect.forbidden, file, line, 'expect.forbidden'),
    followUpOf: null,
    kind: kind === 'followup' ? 'follow-up' : kind,
    collection: null,
  };
  if (Array.isArray(v.history)) q.history = v.history as HistoryTurn[];
  return q;
}

/** Letters and digits only, lower-cased: how the shared sets compare strings. */
export function squash(s: string): string {
  return s.toLowerCase().replace(/[^0-9a-z]+/g, '');
}

const baseName = (p: string): string => p.split(/[\\/]/).pop() ?? p;

/** Scores one reply. `docText` gives a stored document's text by id, to check quotes verbatim. */
export function scoreAnswer(
  q: LabelledQuestion,
  r: AnswerResult,
  docText: (documentId: string) => string | null,
  collection = q.collection ?? '',
): QuestionOutcome {
  const cited = [...new Set(r.citations.map((c) => c.source))];
  const answer = squash(r.answer);
  const withQuotes = squash(`${r.answer} ${r.citations.map((c) => c.quote).join(' ')}`);
  const has = (text: string): boolean =>
    q.mustContain.every((m) => text.includes(squash(m))) && (q.mustContainAny.length === 0 || q.mustContainAny.some((m) => text.includes(squash(m))));
  const docOk = q.doc === null || cited.some((s) => baseName(s) === baseName(q.doc ?? ''));
  // A question that names no expected document or string (an injection probe) is scored only on
  // what its answer must not say.
  const scored = q.answerable && (q.doc !== null || q.mustContain.length > 0 || q.mustContainAny.length > 0);
  let verbatim = 0;
  for (const c of r.citations) if (quoteVerbatim(c, docText)) verbatim++;
  return {
    id: q.id,
    kind: q.kind,
    collection,
    answerable: q.answerable,
    correct: scored ? !r.abstained && has(answer) && docOk : null,
    hit: scored ? !r.abstained && has(withQuotes) : null,
    abstained: r.abstained,
    pageOk: scored && q.page !== null ? r.citations.some((c) => c.page === q.page) : null,
    quotes: r.citations.length,
    quotesVerbatim: verbatim,
    injectionOk: q.mustNotContain.length > 0 ? !q.mustNotContain.some((m) => answer.includes(squash(m))) : null,
    confidence: r.confidence,
    answer: r.answer,
    cited,
  };
}

function quoteVerbatim(c: Citation, docText: (documentId: string) => string | null): boolean {
  const t = docText(c.documentId);
  return t !== null && t.slice(c.start, c.end) === c.quote;
}

const ratio = (n: number, total: number): Rate => ({ n, total, rate: total > 0 ? Math.round((n / total) * 1000) / 1000 : 0 });

/** Equal-width confidence bins over the answered questions that had an expected answer. */
export function reliability(outcomes: QuestionOutcome[], bins = 5): ReliabilityBin[] {
  const answered = outcomes.filter((o) => o.correct !== null && !o.abstained);
  const out: ReliabilityBin[] = [];
  for (let b = 0; b < bins; b++) {
    const from = b / bins;
    const to = (b + 1) / bins;
    const inBin = answered.filter((o) => o.confidence >= from && (o.confidence < to || (b === bins - 1 && o.confidence <= to)));
    if (inBin.length === 0) continue;
    const mean = inBin.reduce((s, o) => s + o.confidence, 0) / inBin.length;
    out.push({
      from,
      to,
      answers: inBin.length,
      meanConfidence: Math.round(mean * 1000) / 1000,
      correct: Math.round((inBin.filter((o) => o.correct).length / inBin.length) * 1000) / 1000,
    });
  }
  return out;
}

export function summarise(outcomes: QuestionOutcome[]): Omit<AnswerEvalReport, 'embedder' | 'mode' | 'outcomes' | 'seconds'> {
  const scored = outcomes.filter((o) => o.correct !== null);
  const unanswerable = outcomes.filter((o) => !o.answerable);
  const paged = outcomes.filter((o) => o.pageOk !== null);
  const injections = outcomes.filter((o) => o.injectionOk !== null);
  const byKind: AnswerEvalReport['byKind'] = {};
  for (const kind of [...new Set(outcomes.map((o) => o.kind))].sort()) {
    const a = scored.filter((o) => o.kind === kind);
    const u = unanswerable.filter((o) => o.kind === kind);
    byKind[kind] = {
      ...(a.length ? { correct: ratio(a.filter((o) => o.correct).length, a.length) } : {}),
      ...(u.length ? { abstained: ratio(u.filter((o) => o.abstained).length, u.length) } : {}),
    };
  }
  return {
    questions: outcomes.length,
    correct: ratio(scored.filter((o) => o.correct).length, scored.length),
    hit: ratio(scored.filter((o) => o.hit).length, scored.length),
    falseAbstention: ratio(scored.filter((o) => o.abstained).length, scored.length),
    unanswerableAbstained: ratio(unanswerable.filter((o) => o.abstained).length, unanswerable.length),
    quotesVerbatim: ratio(
      outcomes.reduce((s, o) => s + o.quotesVerbatim, 0),
      outcomes.reduce((s, o) => s + o.quotes, 0),
    ),
    pageOk: ratio(paged.filter((o) => o.pageOk).length, paged.length),
    injectionResisted: ratio(injections.filter((o) => o.injectionOk).length, injections.length),
    byKind,
    reliability: reliability(outcomes),
  };
}

/** Where each collection's documents are: one subfolder per collection when the set names collections. */
export function collectionFolders(questions: LabelledQuestion[], docs: string): Map<string, string> {
  const named = [...new Set(questions.map((q) => q.collection).filter((c): c is string => c !== null))];
  const out = new Map<string, string>();
  if (named.length === 0) {
    out.set('eval', docs);
    return out;
  }
  for (const c of named) {
    const dir = path.join(docs, c);
    if (!existsSync(dir) || !statSync(dir).isDirectory()) {
      const have = existsSync(docs) ? readdirSync(docs).slice(0, 5).join(', ') : 'nothing';
      throw new Error(`questions name collection "${c}", but ${dir} is not a folder (${docs} holds ${have})`);
    }
    out.set(c, dir);
  }
  return out;
}

export interface EvaluateAnswersOptions {
  questions: string;
  /** A folder (one subfolder per collection when the set names collections), or each collection's folders. */
  docs: string | Map<string, string[]>;
  env: Record<string, string | undefined>;
  extractive?: boolean;
  overrides?: Record<string, unknown>;
  /** Only the first N questions (in file order, follow-ups keep their predecessor). */
  limit?: number;
  /** Keep each reply's evidence (features and ranked candidates) for fitting. */
  explain?: boolean;
  /** Reports each answered question as it goes: (done, total). */
  onProgress?: (done: number, total: number) => void;
}

/** Ingests the documents into a throw-away store and asks every labelled question. */
export async function evaluateAnswers(opts: EvaluateAnswersOptions): Promise<AnswerEvalReport> {
  const started = performance.now();
  let questions = readQuestions(opts.questions);
  if (opts.limit !== undefined) questions = questions.slice(0, opts.limit);
  const folders: Map<string, string[]> =
    typeof opts.docs === 'string' ? new Map([...collectionFolders(questions, opts.docs)].map(([c, d]) => [c, [d]])) : opts.docs;
  const dataDir = mkdtempSync(path.join(tmpdir(), 'sourcebound-answers-'));
  const config = loadConfig({ env: opts.env, overrides: { ...(opts.overrides ?? {}), dataDir, seed: { ingestOnEmpty: false } } });
  const logger = configuredLogger(config, { quiet: true });
  const rt = await createRuntime(config, logger, { processMetrics: false });
  try {
    for (const [collection, dirs] of folders) for (const dir of dirs) await rt.ingestor.ingestPath(dir, { collection, remember: false });
    const answerer = opts.extractive ? rt.extractiveAnswerer : rt.answerer;
    const outcomes: QuestionOutcome[] = [];
    const asked = new Map<string, { question: string; answer: string }>();
    for (const q of questions) {
      const collection = q.collection ?? 'eval';
      const before = q.followUpOf ? asked.get(q.followUpOf) : undefined;
      const history: HistoryTurn[] | undefined =
        q.history ?? (before ? [{ role: 'user', content: before.question }, { role: 'assistant', content: before.answer }] : undefined);
      const r = await answerer.answer({ question: q.question, collection, explain: opts.explain ?? false, ...(history ? { history } : {}) });
      asked.set(q.id, { question: q.question, answer: r.answer });
      const o = scoreAnswer(q, r, (id) => rt.repo.getDocumentText(id), collection);
      if (r.features) o.features = r.features;
      if (r.explanation) o.explanation = r.explanation;
      outcomes.push(o);
      opts.onProgress?.(outcomes.length, questions.length);
    }
    return {
      ...summarise(outcomes),
      embedder: rt.embedder.id,
      mode: opts.extractive || !config.completion.baseUrl ? 'extractive' : 'generative',
      seconds: Math.round((performance.now() - started) / 100) / 10,
      outcomes,
    };
  } finally {
    rt.close();
    rmSync(dataDir, { recursive: true, force: true });
  }
}

/** One JSON line per question: its labels and everything the answer step weighed (for `eval fit`). */
export function writeFeatures(file: string, corpus: string, questions: LabelledQuestion[], outcomes: QuestionOutcome[]): void {
  const byId = new Map(questions.map((q) => [q.id, q]));
  const lines = outcomes
    .filter((o) => o.explanation && (o.correct !== null || !o.answerable))
    .map((o) => {
      const q = byId.get(o.id);
      return JSON.stringify({
        corpus,
        id: o.id,
        kind: o.kind,
        answerable: o.answerable,
        doc: q?.doc ?? null,
        mustContain: q?.mustContain ?? [],
        mustContainAny: q?.mustContainAny ?? [],
        correct: o.correct,
        abstained: o.abstained,
        explanation: o.explanation,
      });
    });
  writeFileSync(file, lines.length ? `${lines.join('\n')}\n` : '');
}
