// The answer flow: standalone question → retrieve → context → generate or extract → check → reply.

import type { Embedder } from '../embed/types.js';
import type { AnswerMode, Citation, DocumentFilter, RetrieveRequest, SearchHit, SearchMode } from '../types.js';
import { ABSTAIN_TEXT, isAbstentionReply, type AbstainReason } from './abstain.js';
import { CAUTION } from './caution.js';
import { createClaimStream } from './claim-stream.js';
import { CompletionError } from './completion.js';
import { fitContext } from './context.js';
import { QUESTION_FEATURES, decide, named, questionFeatures, weighedTerms, type AnswerModel } from './evidence.js';
import { display, extractAnswer } from './extractive.js';
import { FITTED_MODEL } from './fitted-model.js';
import type { GroundedClaim } from './grounding.js';
import { buildMessages } from './prompt.js';
import { rewriteQuestion, type HistoryTurn } from './rewrite.js';
import { expansionWords, type Lexicon } from './terms.js';
import { borrowedTokenizer, type ContextTokenizer } from './tokens.js';
import type { AnswerEvent, AnswerLogger, AnswerReply, CompletionClient, ContextSource, SourceSummary } from './types.js';
import { chooseVersions, versionNote } from './versions.js';

export { standaloneQuestion } from './rewrite.js';
export type { HistoryTurn } from './rewrite.js';

export interface AnswererOptions {
  k: number;
  contextBudgetTokens: number;
  minSupport: number;
  /** At most this many sources in the context (default 8). */
  maxSources?: number;
  /** The sentence ranker, answer/abstain decision and calibration (default: the fitted model). */
  model?: AnswerModel;
  /** Overrides the decision's fitted threshold. */
  minAnswerProbability?: number | null;
  /** Rewrite follow-ups with the completion endpoint when there is one (default true). */
  rewriteWithCompletion?: boolean;
}

export type { RetrieveRequest };

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
  /** The collection's vocabulary, the operator's terms and general synonyms (terms.ts). */
  lexicon?: (collection: string) => Lexicon;
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
  /** Attach the evidence features and ranked candidates (evaluation and fitting only). */
  explain?: boolean;
}

export interface Answerer {
  answer(req: AnswerRequest): Promise<AnswerReply>;
}

// Passages the offline answer ranks sentences from (a model's context keeps `k`).
const EXTRACTIVE_PASSAGES = 20;

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
  const fitted = opts.model ?? FITTED_MODEL;
  const model: AnswerModel =
    opts.minAnswerProbability === undefined || opts.minAnswerProbability === null
      ? fitted
      : { ...fitted, decision: { ...fitted.decision, threshold: opts.minAnswerProbability } };
  // The models were fitted on extractive answers with the hashing embedder; a learned embedder's
  // cosines or a generated answer were never part of the fit, so their scores stay raw.
  const fittedSetUp = !deps.embedder.semantic;
  const rewriter = opts.rewriteWithCompletion === false ? undefined : deps.completion;

  return {
    async answer(req: AnswerRequest): Promise<AnswerReply> {
      const t0 = now();
      const emit = req.onEvent ?? noop;
      const lexicon = deps.lexicon?.(req.collection) ?? {};
      const alternatives = lexicon.synonyms?.alternatives?.bind(lexicon.synonyms);
      const rewrite = await rewriteQuestion(req.question, req.history, rewriter, req.signal, alternatives);
      const question = rewrite.question;
      // The collection's own wording for terms the question phrased its own way or misspelt, so
      // lexical search can reach the passage; the reply still shows the question as asked.
      const extra = expansionWords(question, lexicon);
      const k = req.k ?? opts.k;
      // The offline answer reads more passages than a model's context holds: sentences are cheap to
      // rank, and the ranker's passage-rank feature discounts the later ones. A caller's own k is kept.
      const wide = req.k !== undefined ? k : Math.max(k, EXTRACTIVE_PASSAGES);
      const request: RetrieveRequest = {
        query: extra.length > 0 ? `${question} ${extra.join(' ')}` : question,
        collection: req.collection,
        k: wide,
        mode: req.mode ?? 'hybrid',
        ...(req.filter ? { filter: req.filter } : {}),
      };
      let versions = chooseVersions(question, await deps.retrieve(request));
      // Dropped versions freed places in the context; fill them with the next hits.
      if (versions.dropped > 0) versions = chooseVersions(question, await deps.retrieve({ ...request, k: wide + versions.dropped }));
      const allHits = versions.kept;
      const hits = allHits.slice(0, k);
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

      if (sources.length === 0) return abstain('no_hits', 'extractive');
      // The extractive candidate is always worked out: its evidence decides whether to answer at all.
      const passages =
        allHits.length > hits.length
          ? fitContext(allHits, { budgetTokens: Number.MAX_SAFE_INTEGER, countTokens: () => 0, maxSources: wide }).sources
          : sources;
      const ex = await extractAnswer(question, passages, { embedder: deps.embedder, lexicon, ranker: model.sentence, ...model.composition });
      const terms = weighedTerms(ex.question);
      const features = questionFeatures(ex.ranked, terms);
      const decision = decide(model, features);
      const explained: Pick<AnswerReply, 'features' | 'explanation'> = req.explain
        ? {
            features: named(QUESTION_FEATURES, features),
            explanation: {
              decision: decision.p,
              terms: terms.map((t, i) => ({ label: ex.question.terms[i]?.label ?? '', ...t })),
              ranked: ex.ranked.map((r) => ({ source: passages[r.sourceIndex]?.source ?? '', text: r.text, features: r.features, p: r.p })),
            },
          }
        : {};
      log.debug({ ...named(QUESTION_FEATURES, features), p: decision.p }, 'answer evidence');
      if (!decision.answer || !ex.answer) return { ...abstain('weak_evidence', 'extractive'), ...explained };

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
          if (supported.length === 0) {
            log.warn({ unsupported: claims.length }, 'generated answer not grounded');
            return abstain('unsupported_answer', 'generative', undefined, claims);
          }
          const citations = claimsIn.citations();
          const note = versionNoteFor(citations, versions.chosen);
          // Never fitted on generated answers: the decision's probability scaled by the grounded share, raw.
          const raw = Math.round(decision.p * (supported.length / claims.length) * 1000) / 1000;
          return finish(
            {
              answer: note ? `${claimsIn.answer()} ${note}` : claimsIn.answer(),
              abstained: false,
              mode: 'generative',
              citations,
              claims,
              confidence: raw,
              confidenceCalibrated: false,
              evidence: raw,
              ...explained,
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

      // Each quoted passage is its own claim, verbatim, with its own citation number; its delta
      // carries that citation, as a generated sentence's does.
      const claims: GroundedClaim[] = ex.citations.map((c) => ({ text: display(c.quote), sources: [c.n], supported: true, support: 1 }));
      const pieces: { text: string; citations: Citation[] }[] = claims.map((c, i) => ({
        text: `${i > 0 ? ' ' : ''}${c.text} [${c.sources[0]}]`,
        citations: ex.citations.slice(i, i + 1),
      }));
      const note = versionNoteFor(ex.citations, versions.chosen);
      if (note) pieces.push({ text: ` ${note}`, citations: [] });
      const raw = Math.round(decision.p * 1000) / 1000;
      const result: Omit<AnswerReply, 'question' | 'timings' | 'caution' | 'context'> = {
        answer: pieces.map((p) => p.text).join(''),
        abstained: false,
        mode: 'extractive',
        citations: ex.citations,
        claims,
        confidence: fittedSetUp ? Math.round(decision.confidence * 1000) / 1000 : raw,
        confidenceCalibrated: fittedSetUp,
        ...(fittedSetUp && model.calibration.heldOutError !== undefined ? { confidenceError: model.calibration.heldOutError } : {}),
        evidence: raw,
        ...explained,
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

/** The note naming the version used, when an answer cites a policy that had another version in the context. */
function versionNoteFor(citations: Citation[], chosen: ReadonlyMap<string, string>): string | null {
  for (const c of citations) {
    const date = chosen.get(c.documentId);
    if (date) return versionNote(date);
  }
  return null;
}

function ms(x: number): number {
  return Math.round(x * 10) / 10;
}
