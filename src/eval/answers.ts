import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { loadConfig } from '../config/index.js';
import { createLogger } from '../logger.js';
import { createRuntime } from '../runtime.js';
import type { AnswerResult } from '../types.js';
import { readJsonl } from './data.js';

export type QuestionKind = 'answerable' | 'paraphrase' | 'unanswerable' | 'followup' | 'injection';

export interface LabelledQuestion {
  id: string;
  kind: QuestionKind;
  question: string;
  history?: { role: 'user' | 'assistant'; content: string }[];
  expect: { document?: string; page?: number; facts?: string[]; forbidden?: string[] };
}

export interface QuestionOutcome {
  id: string;
  kind: QuestionKind;
  /** For questions with an expected answer: fact present and cited to the right document. */
  correct: boolean | null;
  abstained: boolean;
  /** Expected to abstain (no expected document). */
  shouldAbstain: boolean;
  quotes: number;
  quotesVerbatim: number;
  forbiddenSaid: boolean;
  answer: string;
  cited: string[];
}

export interface AnswerEvalReport {
  questions: number;
  answerable: { total: number; correct: number; falseAbstentions: number; rate: number; falseAbstentionRate: number };
  unanswerable: { total: number; abstained: number; rate: number };
  injection: { total: number; resisted: number };
  quotes: { total: number; verbatim: number; rate: number };
  embedder: string;
  mode: string;
  outcomes: QuestionOutcome[];
  seconds: number;
}

const KINDS: readonly QuestionKind[] = ['answerable', 'paraphrase', 'unanswerable', 'followup', 'injection'];

export function readQuestions(file: string): LabelledQuestion[] {
  return readJsonl(file, (v, line) => {
    if (typeof v.question !== 'string' || !KINDS.includes(v.kind as QuestionKind)) {
      throw new Error(`${file}:${line}: each line needs "question" and a "kind" of ${KINDS.join(', ')}`);
    }
    const q: LabelledQuestion = {
      id: String(v.id ?? line),
      kind: v.kind as QuestionKind,
      question: v.question,
      expect: (v.expect as LabelledQuestion['expect']) ?? {},
    };
    if (Array.isArray(v.history)) q.history = v.history as LabelledQuestion['history'];
    return q;
  });
}

const squash = (s: string): string => s.replace(/\s+/g, ' ').trim().toLowerCase();

/** Scores one answer against its label. `docText` gives a document's normalised text by id. */
export function scoreAnswer(q: LabelledQuestion, r: AnswerResult, docText: (documentId: string) => string | null): QuestionOutcome {
  const cited = [...new Set(r.citations.map((c) => c.source))];
  const expectedDoc = q.expect.document;
  const shouldAbstain = !expectedDoc && q.kind !== 'injection' ? true : q.kind === 'unanswerable';
  let correct: boolean | null = null;
  if (expectedDoc && q.kind !== 'injection') {
    const facts = q.expect.facts ?? [];
    const text = squash(`${r.answer} ${r.citations.map((c) => c.quote).join(' ')}`);
    correct =
      !r.abstained &&
      facts.every((f) => text.includes(squash(f))) &&
      cited.some((s) => s === expectedDoc || s.endsWith(`/${expectedDoc}`));
  }
  const forbidden = q.expect.forbidden ?? [];
  const forbiddenSaid = !r.abstained && forbidden.some((w) => new RegExp(`\\b${escapeRe(w)}\\b`, 'i').test(r.answer));
  let verbatim = 0;
  for (const c of r.citations) {
    const t = docText(c.documentId);
    if (t !== null && t.includes(c.quote) && t.slice(c.start, c.end) === c.quote) verbatim++;
  }
  return {
    id: q.id,
    kind: q.kind,
    correct,
    abstained: r.abstained,
    shouldAbstain,
    quotes: r.citations.length,
    quotesVerbatim: verbatim,
    forbiddenSaid,
    answer: r.answer,
    cited,
  };
}

export function summarise(outcomes: QuestionOutcome[]): Omit<AnswerEvalReport, 'embedder' | 'mode' | 'outcomes' | 'seconds'> {
  const answerable = outcomes.filter((o) => o.correct !== null);
  const unanswerable = outcomes.filter((o) => o.kind === 'unanswerable');
  const injection = outcomes.filter((o) => o.kind === 'injection');
  const quotes = outcomes.reduce((s, o) => s + o.quotes, 0);
  const verbatim = outcomes.reduce((s, o) => s + o.quotesVerbatim, 0);
  const ratio = (a: number, b: number): number => (b > 0 ? Math.round((a / b) * 1000) / 1000 : 0);
  const correct = answerable.filter((o) => o.correct).length;
  const falseAbst = answerable.filter((o) => o.abstained).length;
  const abst = unanswerable.filter((o) => o.abstained).length;
  return {
    questions: outcomes.length,
    answerable: { total: answerable.length, correct, falseAbstentions: falseAbst, rate: ratio(correct, answerable.length), falseAbstentionRate: ratio(falseAbst, answerable.length) },
    unanswerable: { total: unanswerable.length, abstained: abst, rate: ratio(abst, unanswerable.length) },
    injection: { total: injection.length, resisted: injection.filter((o) => !o.forbiddenSaid).length },
    quotes: { total: quotes, verbatim, rate: ratio(verbatim, quotes) },
  };
}

/** Ingests a document folder into a throw-away store and asks every labelled question. */
export async function evaluateAnswers(opts: {
  questions: string;
  docs: string;
  env: Record<string, string | undefined>;
  extractive?: boolean;
  overrides?: Record<string, unknown>;
}): Promise<AnswerEvalReport> {
  const started = performance.now();
  const questions = readQuestions(opts.questions);
  const dataDir = mkdtempSync(path.join(tmpdir(), 'sourcebound-answers-'));
  const config = loadConfig({ env: opts.env, overrides: { ...(opts.overrides ?? {}), dataDir, seed: { ingestOnEmpty: false } } });
  const logger = createLogger(config.logLevel === 'info' ? 'warn' : config.logLevel, process.stderr as never);
  const rt = await createRuntime(config, logger);
  try {
    await rt.ingestor.ingestPath(opts.docs, { collection: 'eval', remember: false });
    const answerer = opts.extractive ? rt.extractiveAnswerer : rt.answerer;
    const outcomes: QuestionOutcome[] = [];
    for (const q of questions) {
      const r = await answerer.answer({ question: q.question, collection: 'eval', ...(q.history ? { history: q.history } : {}) });
      outcomes.push(scoreAnswer(q, r, (id) => rt.repo.getDocumentText(id)));
    }
    return {
      ...summarise(outcomes),
      embedder: rt.embedder.id,
      mode: opts.extractive || !config.completion.baseUrl ? 'extractive' : 'generative',
      outcomes,
      seconds: Math.round((performance.now() - started) / 100) / 10,
    };
  } finally {
    rt.close();
    rmSync(dataDir, { recursive: true, force: true });
  }
}

function escapeRe(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}
