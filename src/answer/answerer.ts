// The answer flow: standalone question → retrieve → context → generate or extract → check → reply.

import type { Embedder } from '../embed/types.js';
import type { AnswerMode, Citation, DocumentFilter, SearchHit, SearchMode } from '../types.js';
import { ABSTAIN_TEXT, abstainReason, confidence, isAbstentionReply, type AbstainReason } from './abstain.js';
import { DEMO_CALIBRATION, calibrate, type IsotonicMap } from './calibration.js';
import { CAUTION } from './caution.js';
import { createClaimStream } from './claim-stream.js';
import { CompletionError } from './completion.js';
import { fitContext } from './context.js';
import { absentTerms, display, extractAnswer, questionCoverage } from './extractive.js';
import type { GroundedClaim } from './grounding.js';
import { buildMessages } from './prompt.js';
import { rewriteQuestion, type HistoryTurn } from './rewrite.js';
import { expansionWords, termIn } from './synonyms.js';
import { borrowedTokenizer, type ContextTokenizer } from './tokens.js';
import type { AnswerEvent, AnswerLogger, AnswerReply, CompletionClient, ContextSource, SourceSummary } from './types.js';
import { chooseVersions, versionNote } from './versions.js';
import { contentStems } from './words.js';

export { standaloneQuestion } from './rewrite.js';
export type { HistoryTurn } from './rewrite.js';

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
  /** Maps the raw evidence score to a probability (default: fitted on the demo question set). */
  calibration?: IsotonicMap;
  /** Rewrite follow-ups with the completion endpoint when there is one (default true). */
  rewriteWithCompletion?: boolean;
}

export interface RetrieveRequest {
  query: string;
  collection: string;
  k: number;
  mode: SearchMode;
  /** Only these documents (by id and/or metadata values). */
  filter?: DocumentFilter;
}

export interface AnswererDeps {
  retrieve: (q: RetrieveRequest) => Promise<SearchHit[]>;
  embedder: Embedder;
  completion?: CompletionClient;
  /** Counts context tokens in the completion model's tokenizer (see tokens.ts). */
  tokenizer?: ContextTokenizer;
  /** Older form of `tokenizer`: a bare counter, reported as an estimate. */
  countTokens?: (s: string) => number;
  logger?: AnswerLogger;
  now?: () => number;
  options: AnswererOptions;
}

export interface AnswerRequest {
  question: string;
  collection: string;
  history?: HistoryTurn[];
  k?: number;
  mode?: SearchMode;
  /** Answer from these documents only. */
  filter?: DocumentFilter;
  /** Cancels the completion call when the client goes away. */
  signal?: AbortSignal;
  /** Receives the numbered sources and the answer text as it is produced. */
  onEvent?: (e: AnswerEvent) => void;
}

export interface Answerer {
  answer(req: AnswerRequest): Promise<AnswerReply>;
}

const noop = (): void => undefined;
const silent: AnswerLogger = { info: noop, warn: noop, debug: noop };

export function createAnswerer(deps: AnswererDeps): Answerer {
  const log = deps.logger ?? silent;
  const now = deps.now ?? (() => performance.now());
  const tokenizer =
    deps.tokenizer ??
    (deps.countTokens
      ? borrowedTokenizer('custom', deps.countTokens)
      : borrowedTokenizer(`embedder:${deps.embedder.id}`, (s) => deps.embedder.countTokens(s)));
  const opts = deps.options;
  const thresholds = { minLexicalCoverage: opts.minLexicalCoverage, minDenseScore: opts.minDenseScore };
  const calibration = opts.calibration ?? DEMO_CALIBRATION;
  const rewriter = opts.rewriteWithCompletion === false ? undefined : deps.completion;

  return {
    async answer(req: AnswerRequest): Promise<AnswerReply> {
      const t0 = now();
      const emit = req.onEvent ?? noop;
      const rewrite = await rewriteQuestion(req.question, req.history, rewriter, req.signal);
      const question = rewrite.question;
      // The policy's own wording for terms the question phrased its own way, so lexical search
      // can reach the passage; the reply still shows the question as asked.
      const extra = expansionWords(question);
      const k = req.k ?? opts.k;
      const request: RetrieveRequest = {
        query: extra.length > 0 ? `${question} ${extra.join(' ')}` : question,
        collection: req.collection,
        k,
        mode: req.mode ?? 'hybrid',
        ...(req.filter ? { filter: req.filter } : {}),
      };
      let versions = chooseVersions(question, await deps.retrieve(request));
      // Dropped versions freed places in the context; fill them with the next hits.
      if (versions.dropped > 0) versions = chooseVersions(question, await deps.retrieve({ ...request, k: k + versions.dropped }));
      const hits = versions.kept;
      const t1 = now();

      const { sources, tokens } = fitContext(hits, {
        budgetTokens: opts.contextBudgetTokens,
        countTokens: (s) => tokenizer.count(s),
        ...(opts.maxSources !== undefined ? { maxSources: opts.maxSources } : {}),
      });
      emit({ type: 'sources', sources: sources.map(summarise) });
      const context = {
        sources: sources.length,
        tokens,
        budgetTokens: opts.contextBudgetTokens,
        tokenizer: tokenizer.name,
        estimated: !tokenizer.exact,
      };
      // Set once checked model text has reached the caller; a later extractive answer must replace it.
      let shown = false;
      const finish = (
        r: Omit<AnswerReply, 'question' | 'timings' | 'caution' | 'context'>,
        pieces: (string | { text: string; citations: Citation[] })[] | null,
        append = false,
      ): AnswerReply => {
        // Text already shown belongs to an attempt that was abandoned unless we are appending to it.
        const reset = shown && !append;
        (pieces ?? []).forEach((piece, i) => {
          const { text, citations = [] } = typeof piece === 'string' ? { text: piece } : piece;
          const cited = citations.length > 0 ? { citations } : {};
          emit(i === 0 && reset ? { type: 'delta', text: text.trimStart(), reset: true, ...cited } : { type: 'delta', text, ...cited });
        });
        const t2 = now();
        const out: AnswerReply = {
          ...r,
          caution: CAUTION,
          question,
          context,
          timings: { retrieveMs: ms(t1 - t0), answerMs: ms(t2 - t1), totalMs: ms(t2 - t0) },
        };
        if (rewrite.method) out.rewrittenBy = rewrite.method;
        return out;
      };
      const abstain = (reason: AbstainReason, mode: AnswerMode, fallbackReason?: string, claims: GroundedClaim[] = []): AnswerReply => {
        log.info({ reason, hits: hits.length, mode }, 'answer abstained');
        const r: Omit<AnswerReply, 'question' | 'timings' | 'caution' | 'context'> = {
          answer: ABSTAIN_TEXT,
          abstained: true,
          abstainReason: reason,
          mode,
          citations: [],
          claims,
          confidence: 0,
          evidence: 0,
        };
        if (fallbackReason) r.fallbackReason = fallbackReason;
        return finish(r, [ABSTAIN_TEXT]);
      };

      // A hashing vector's cosine re-measures word overlap, so only a learned model's
      // similarity counts as separate evidence.
      const denseBest = deps.embedder.semantic ? bestDense(hits) : null;
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
        // Checked sentences go to the caller as soon as they are complete; an unchecked word never does.
        const claimsIn = createClaimStream(sources, opts.minSupport, (p) => {
          shown = true;
          emit({ type: 'delta', text: p.text, ...(p.citations.length ? { citations: p.citations } : {}) });
        });
        try {
          const messages = buildMessages(question, sources);
          if (deps.completion.stream) await deps.completion.stream(messages, (t) => claimsIn.push(t), req.signal);
          else claimsIn.push(await deps.completion.complete(messages, req.signal));
          claimsIn.end();
          const removed = claimsIn.removed();
          if (removed.length > 0) log.warn({ removed }, 'removed citations to missing sources');
          const claims = claimsIn.claims();
          const supported = claims.filter((c) => c.supported);
          if (supported.length === 0 && isAbstentionReply(claimsIn.raw())) return abstain('model_abstained', 'generative');
          const late = abstainReason(
            { hitCount: sources.length, coverage, denseScore: denseBest, supportedClaims: supported.length },
            thresholdsNow,
          );
          if (late) {
            log.warn({ reason: late, unsupported: claims.length - supported.length }, 'generated answer not grounded');
            return abstain(late, 'generative', undefined, claims);
          }
          const citations = claimsIn.citations();
          const note = versionNoteFor(citations, versions.chosen);
          const raw = confidence({ coverage, denseScore: denseBest, supportedShare: supported.length / claims.length });
          return finish(
            {
              answer: note ? `${claimsIn.answer()} ${note}` : claimsIn.answer(),
              abstained: false,
              mode: 'generative',
              citations,
              claims,
              confidence: calibrate(raw, calibration),
              evidence: raw,
            },
            note ? [` ${note}`] : null,
            true,
          );
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
      // Each quoted passage is its own claim, verbatim, with its own citation number; its delta
      // carries that citation, as a generated sentence's does.
      const claims: GroundedClaim[] = ex.citations.map((c) => ({ text: display(c.quote), sources: [c.n], supported: true, support: 1 }));
      const pieces: { text: string; citations: Citation[] }[] = claims.map((c, i) => ({
        text: `${i > 0 ? ' ' : ''}${c.text} [${c.sources[0]}]`,
        citations: ex.citations.slice(i, i + 1),
      }));
      const note = versionNoteFor(ex.citations, versions.chosen);
      if (note) pieces.push({ text: ` ${note}`, citations: [] });
      const raw = confidence({ coverage: ex.support, denseScore: dense, supportedShare: 1 });
      const result: Omit<AnswerReply, 'question' | 'timings' | 'caution' | 'context'> = {
        answer: pieces.map((p) => p.text).join(''),
        abstained: false,
        mode: 'extractive',
        citations: ex.citations,
        claims,
        confidence: calibrate(raw, calibration),
        evidence: raw,
      };
      if (fallbackReason) result.fallbackReason = fallbackReason;
      return finish(result, pieces);
    },
  };
}

function summarise(s: ContextSource): SourceSummary {
  return {
    n: s.n,
    documentId: s.documentId,
    source: s.source,
    title: s.title,
    page: s.page,
    pageEnd: s.pageEnd,
    section: s.section,
    effectiveDate: s.effectiveDate,
    version: s.version ?? null,
    text: s.text,
  };
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

/** The note naming the version used, when an answer cites a policy that had another version in the context. */
function versionNoteFor(citations: Citation[], chosen: ReadonlyMap<string, string>): string | null {
  for (const c of citations) {
    const date = chosen.get(c.documentId);
    if (date) return versionNote(date);
  }
  return null;
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
