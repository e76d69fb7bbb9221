// The answer flow: standalone question → retrieve → context → generate or extract → check → reply.

import type { Embedder } from '../embed/types.js';
import type { AnswerMode, AnswerResult, Citation, SearchHit, SearchMode } from '../types.js';
import {
  ABSTAIN_TEXT,
  abstainReason,
  bestSentenceCoverage,
  confidence,
  headingSet,
  isAbstentionReply,
  type AbstainReason,
} from './abstain.js';
import { CAUTION } from './caution.js';
import { citationFor } from './cite.js';
import { CompletionError } from './completion.js';
import { buildContext } from './context.js';
import { extractAnswer } from './extractive.js';
import { checkGrounding, renumberMarkers, type GroundedClaim } from './grounding.js';
import { buildMessages } from './prompt.js';
import { isJunkSentence, splitSentences } from './sentences.js';
import type { AnswerLogger, CompletionClient, ContextSource } from './types.js';
import { contentStems, contentTokens } from './words.js';

export interface AnswererOptions {
  k: number;
  contextBudgetTokens: number;
  minSupport: number;
  minLexicalCoverage: number;
  minDenseScore: number;
  /** At most this many sources in the context (default 8). */
  maxSources?: number;
}

export interface RetrieveRequest {
  query: string;
  collection: string;
  k: number;
  mode: SearchMode;
}

export interface AnswererDeps {
  retrieve: (q: RetrieveRequest) => Promise<SearchHit[]>;
  embedder: Embedder;
  completion?: CompletionClient;
  countTokens?: (s: string) => number;
  logger?: AnswerLogger;
  now?: () => number;
  options: AnswererOptions;
}

export interface HistoryTurn {
  role: 'user' | 'assistant';
  content: string;
}

export interface AnswerRequest {
  question: string;
  collection: string;
  history?: HistoryTurn[];
  k?: number;
  mode?: SearchMode;
  /** Cancels the completion call when the client goes away. */
  signal?: AbortSignal;
}

export interface Answerer {
  answer(req: AnswerRequest): Promise<AnswerResult>;
}

const noop = (): void => undefined;
const silent: AnswerLogger = { info: noop, warn: noop, debug: noop };
// Enough words to carry the topic of the previous question without drowning the follow-up.
const MAX_CARRIED_WORDS = 8;

export function createAnswerer(deps: AnswererDeps): Answerer {
  const log = deps.logger ?? silent;
  const now = deps.now ?? (() => performance.now());
  const countTokens = deps.countTokens ?? ((s: string) => deps.embedder.countTokens(s));
  const opts = deps.options;
  const thresholds = { minLexicalCoverage: opts.minLexicalCoverage, minDenseScore: opts.minDenseScore };

  return {
    async answer(req: AnswerRequest): Promise<AnswerResult> {
      const t0 = now();
      const question = standaloneQuestion(req.question, req.history);
      const hits = await deps.retrieve({
        query: question,
        collection: req.collection,
        k: req.k ?? opts.k,
        mode: req.mode ?? 'hybrid',
      });
      const t1 = now();
      const timings = (): Record<string, number> => {
        const t2 = now();
        return { retrieveMs: ms(t1 - t0), answerMs: ms(t2 - t1), totalMs: ms(t2 - t0) };
      };
      const abstain = (reason: AbstainReason, mode: AnswerMode, fallbackReason?: string): AnswerResult => {
        log.info({ reason, hits: hits.length, mode }, 'answer abstained');
        const r: AnswerResult = {
          answer: ABSTAIN_TEXT,
          abstained: true,
          mode,
          citations: [],
          confidence: 0,
          caution: CAUTION,
          question,
          timings: timings(),
        };
        if (fallbackReason) r.fallbackReason = fallbackReason;
        return r;
      };

      const denseBest = bestDense(hits);
      const sources = buildContext(hits, {
        budgetTokens: opts.contextBudgetTokens,
        countTokens,
        ...(opts.maxSources !== undefined ? { maxSources: opts.maxSources } : {}),
      });
      const coverage = bestSentenceCoverage(question, sources);
      const early = abstainReason({ hitCount: sources.length, coverage, denseScore: denseBest }, thresholds);
      if (early) return abstain(early, 'extractive');

      let fallbackReason: string | undefined;
      if (deps.completion) {
        try {
          const reply = await deps.completion.complete(buildMessages(question, sources), req.signal);
          if (isAbstentionReply(reply)) return abstain('model_abstained', 'generative');
          const g = checkGrounding(reply, sources, { minSupport: opts.minSupport });
          if (g.removed.length > 0) log.warn({ removed: g.removed }, 'removed citations to missing sources');
          const supported = g.claims.filter((c) => c.supported).length;
          const late = abstainReason(
            { hitCount: sources.length, coverage, denseScore: denseBest, supportedClaims: supported },
            thresholds,
          );
          if (late) return abstain(late, 'generative');
          const { answer, citations } = generativeCitations(g.answer, g.cited, g.claims, sources);
          return {
            answer,
            abstained: false,
            mode: 'generative',
            citations,
            confidence: confidence({ coverage, denseScore: denseBest, supportedShare: supported / g.claims.length }),
            caution: CAUTION,
            question,
            timings: timings(),
          };
        } catch (err) {
          if (req.signal?.aborted) throw err;
          fallbackReason = err instanceof CompletionError ? `completion_${err.reason}` : 'completion_failed';
          log.warn({ err: err instanceof Error ? err.message : String(err), fallbackReason }, 'completion failed; answering extractively');
        }
      }

      const ex = await extractAnswer(question, sources, { embedder: deps.embedder });
      const dense = maxOrNull(denseBest, ex.cosine);
      const reason = ex.answer ? abstainReason({ hitCount: sources.length, coverage: ex.support, denseScore: dense }, thresholds) : 'weak_evidence';
      if (reason) return abstain(reason, 'extractive', fallbackReason);
      const result: AnswerResult = {
        answer: ex.answer,
        abstained: false,
        mode: 'extractive',
        citations: ex.citations,
        confidence: confidence({ coverage: ex.support, denseScore: dense, supportedShare: 1 }),
        caution: CAUTION,
        question,
        timings: timings(),
      };
      if (fallbackReason) result.fallbackReason = fallbackReason;
      return result;
    },
  };
}

/**
 * Offline condensation of a follow-up: the content words of the last user turn that the
 * follow-up does not already contain are put in front of it, so "and for trams?" after a
 * question about delay refunds retrieves delay-refund passages.
 */
export function standaloneQuestion(question: string, history?: HistoryTurn[]): string {
  const q = question.trim();
  const lastUser = [...(history ?? [])].reverse().find((t) => t.role === 'user');
  if (!lastUser) return q;
  const have = contentStems(q);
  const carried: string[] = [];
  const seen = new Set<string>();
  for (const t of contentTokens(lastUser.content)) {
    if (have.has(t.stem) || seen.has(t.stem)) continue;
    seen.add(t.stem);
    carried.push(lastUser.content.slice(t.start, t.end));
    if (carried.length >= MAX_CARRIED_WORDS) break;
  }
  return carried.length > 0 ? `${carried.join(' ')} ${q}` : q;
}

/**
 * Citations for a generated answer: cited sources renumbered 1..m by first use, each quoting
 * the sentence of its source that shares most content words with the claims citing it.
 */
function generativeCitations(
  answer: string,
  cited: number[],
  claims: GroundedClaim[],
  sources: ContextSource[],
): { answer: string; citations: Citation[] } {
  const mapping = new Map<number, number>();
  cited.forEach((n, i) => mapping.set(n, i + 1));
  const citations: Citation[] = [];
  for (const [oldN, newN] of mapping) {
    const source = sources.find((s) => s.n === oldN);
    if (!source) continue;
    const want = new Set<string>();
    for (const c of claims) if (c.sources.includes(oldN)) for (const w of contentStems(c.text)) want.add(w);
    const span = bestSpan(source, want);
    citations.push(citationFor(source, span.start, span.end, newN));
  }
  return { answer: renumberMarkers(answer, mapping), citations };
}

function bestSpan(source: ContextSource, want: ReadonlySet<string>): { start: number; end: number } {
  const headings = headingSet(source);
  let best: { start: number; end: number } | null = null;
  let bestHits = -1;
  for (const s of splitSentences(source.text)) {
    if (isJunkSentence(s.text, headings)) continue;
    let hits = 0;
    for (const w of contentStems(s.text)) if (want.has(w)) hits++;
    if (hits > bestHits) {
      bestHits = hits;
      best = { start: s.start, end: s.end };
    }
  }
  if (best) return best;
  const lead = source.text.length - source.text.trimStart().length;
  return { start: lead, end: source.text.trimEnd().length };
}

function bestDense(hits: SearchHit[]): number | null {
  let best: number | null = null;
  for (const h of hits) if (h.denseScore !== undefined) best = maxOrNull(best, h.denseScore);
  return best;
}

function maxOrNull(a: number | null, b: number | null): number | null {
  if (a === null) return b;
  if (b === null) return a;
  return Math.max(a, b);
}

function ms(x: number): number {
  return Math.round(x * 10) / 10;
}
