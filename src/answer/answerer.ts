// The answer flow: standalone question → retrieve → context → generate or extract → check → reply.

import type { Embedder } from '../embed/types.js';
import type { AnswerMode, AnswerResult, Citation, SearchHit, SearchMode } from '../types.js';
import {
  ABSTAIN_TEXT,
  abstainReason,
  confidence,
  headingSet,
  isAbstentionReply,
  type AbstainReason,
} from './abstain.js';
import { CAUTION } from './caution.js';
import { citationFor } from './cite.js';
import { CompletionError } from './completion.js';
import { buildContext } from './context.js';
import { absentTerms, extractAnswer, questionCoverage } from './extractive.js';
import { checkGrounding, renumberMarkers, type GroundedClaim } from './grounding.js';
import { buildMessages } from './prompt.js';
import { isJunkSentence, splitSentences } from './sentences.js';
import { expansionWords, termIn } from './synonyms.js';
import type { AnswerLogger, CompletionClient, ContextSource } from './types.js';
import { chooseVersions, versionNote } from './versions.js';
import { contentStems, contentTokens, stem } from './words.js';

export interface AnswererOptions {
  k: number;
  contextBudgetTokens: number;
  minSupport: number;
  minLexicalCoverage: number;
  minDenseScore: number;
  /** At most this many sources in the context (default 8). */
  maxSources?: number;
  /** Credit for a question term found only in a sentence's headings or table header, 0..1 (default 0.5). */
  headingCredit?: number;
  /** Share of evidence lost when a precise question (how long, how much ...) meets a sentence without that kind of fact (default 0.25). */
  kindMissPenalty?: number;
  /** When the question names a topic term found nowhere in the collection, the best sentence must cover at least this much (default 0.8). */
  minCoverageWithUnknownTerm?: number;
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
      // The policy's own wording for terms the question phrased its own way, so lexical search
      // can reach the passage; the reply still shows the question as asked.
      const extra = expansionWords(question);
      const k = req.k ?? opts.k;
      const request: RetrieveRequest = {
        query: extra.length > 0 ? `${question} ${extra.join(' ')}` : question,
        collection: req.collection,
        k,
        mode: req.mode ?? 'hybrid',
      };
      let versions = chooseVersions(question, await deps.retrieve(request));
      // Dropped versions freed places in the context; fill them with the next hits.
      if (versions.dropped > 0) versions = chooseVersions(question, await deps.retrieve({ ...request, k: k + versions.dropped }));
      const hits = versions.kept;
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

      // A hashing vector's cosine re-measures word overlap, so only a learned model's
      // similarity counts as separate evidence.
      const denseBest = deps.embedder.semantic ? bestDense(hits) : null;
      const sources = buildContext(hits, {
        budgetTokens: opts.contextBudgetTokens,
        countTokens,
        ...(opts.maxSources !== undefined ? { maxSources: opts.maxSources } : {}),
      });
      const credit = opts.headingCredit ?? 0.5;
      const penalty = opts.kindMissPenalty ?? 0.25;
      const { common, unknown } = await lookUpAbsent(question, sources, req.collection, deps.retrieve);
      // A topic term the whole collection never mentions ("wifi") says the question is about
      // something the documents do not cover, so the rest of it must be covered very well.
      const thresholdsNow =
        unknown.size > 0
          ? { ...thresholds, minLexicalCoverage: Math.max(thresholds.minLexicalCoverage, opts.minCoverageWithUnknownTerm ?? 0.8) }
          : thresholds;
      const coverage = questionCoverage(question, sources, credit, penalty, common);
      const early = abstainReason({ hitCount: sources.length, coverage, denseScore: denseBest }, thresholdsNow);
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
            thresholdsNow,
          );
          if (late) return abstain(late, 'generative');
          const { answer, citations } = generativeCitations(g.answer, g.cited, g.claims, sources);
          return {
            answer: withVersionNote(answer, citations, versions.chosen),
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

      const ex = await extractAnswer(question, sources, { embedder: deps.embedder, contextCredit: credit, kindMissPenalty: penalty, commonTerms: common });
      const dense = deps.embedder.semantic ? maxOrNull(denseBest, ex.cosine) : null;
      log.debug({ coverage, support: ex.support, dense, uncovered: ex.uncovered, absent: ex.absent, unknown: [...unknown] }, 'extractive evidence');
      const reason = ex.answer ? abstainReason({ hitCount: sources.length, coverage: ex.support, denseScore: dense }, thresholdsNow) : 'weak_evidence';
      if (reason) return abstain(reason, 'extractive', fallbackReason);
      const result: AnswerResult = {
        answer: withVersionNote(ex.answer, ex.citations, versions.chosen),
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
 * question about delay refunds retrieves delay-refund passages. A carried word of the same
 * kind as one the follow-up names ("trams" when it asks "and on buses?") is the thing being
 * swapped, so it is left behind; and a follow-up without its own question opener keeps the
 * previous one ("how long ..."), since it asks for the same kind of fact.
 */
export function standaloneQuestion(question: string, history?: HistoryTurn[]): string {
  const q = question.trim();
  const lastUser = [...(history ?? [])].reverse().find((t) => t.role === 'user');
  if (!lastUser) return q;
  const have = contentStems(q);
  const swapped = new Set<number>();
  CONTRASTS.forEach((row, i) => {
    if (row.some((w) => have.has(w))) swapped.add(i);
  });
  const carried: string[] = [];
  const seen = new Set<string>();
  for (const t of contentTokens(lastUser.content)) {
    if (have.has(t.stem) || seen.has(t.stem)) continue;
    seen.add(t.stem);
    if (CONTRASTS.some((row, i) => swapped.has(i) && row.includes(t.stem))) continue;
    carried.push(lastUser.content.slice(t.start, t.end));
    if (carried.length >= MAX_CARRIED_WORDS) break;
  }
  if (carried.length === 0) return q;
  const opener = OPENER.test(q) ? null : (OPENER.exec(lastUser.content.trim())?.[0] ?? null);
  return `${opener ? `${opener.toLowerCase()} ` : ''}${carried.join(' ')} ${q}`;
}

// A term held by at least this many chunks of the collection is common there.
const COMMON_CHUNKS = 3;
// Lexical look-ups per question for terms the context lacks; questions rarely have more.
const MAX_LOOKUPS = 4;

/**
 * Topic terms the context lacks, sorted by how often the collection at large holds them. A term
 * the whole collection lacks ("wifi") says the question is about something else; one that is
 * common elsewhere ("tram") only says retrieval brought other passages. One lexical query per
 * term, counting hits whose text really holds it.
 */
async function lookUpAbsent(
  question: string,
  sources: ContextSource[],
  collection: string,
  retrieve: AnswererDeps['retrieve'],
): Promise<{ common: Set<string>; unknown: Set<string> }> {
  const common = new Set<string>();
  const unknown = new Set<string>();
  for (const term of absentTerms(question, sources).slice(0, MAX_LOOKUPS)) {
    const hits = await retrieve({ query: term.label, collection, k: 20, mode: 'lexical' });
    const holding = hits.filter((h) => termIn(term, contentStems(h.text))).length;
    if (holding >= COMMON_CHUNKS) common.add(term.label);
    if (holding === 0) unknown.add(term.label);
  }
  return { common, unknown };
}

// Words that name alternatives of one kind: a follow-up naming one replaces the other.
const CONTRASTS: readonly string[][] = [
  ['tram', 'bus', 'train', 'coach', 'ferry'],
  ['adult', 'child', 'senior', 'student', 'infant'],
  ['weekday', 'weekend', 'saturday', 'sunday'],
  ['single', 'return', 'season'],
].map((row) => row.map((w) => stem(w)));

// Openers that fix the kind of fact asked for.
const OPENER = /^\W*(?:how (?:long|soon|quickly|much|many|far|old|often)|when|where|what time)\b/i;

/** Names the version used when an answer cites a policy that had another version in the context. */
function withVersionNote(answer: string, citations: Citation[], chosen: ReadonlyMap<string, string>): string {
  for (const c of citations) {
    const date = chosen.get(c.documentId);
    if (date) return `${answer} ${versionNote(date)}`;
  }
  return answer;
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
