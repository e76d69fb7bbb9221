export { ABSTAIN_TEXT, isAbstentionReply } from './abstain.js';
export type { AbstainReason } from './abstain.js';
export { createAnswerer, standaloneQuestion } from './answerer.js';
export type { Answerer, AnswererDeps, AnswererOptions, AnswerRequest, RetrieveRequest } from './answerer.js';
export { createCircuitBreaker } from './breaker.js';
export type { BreakerState, CircuitBreaker, CircuitBreakerOptions } from './breaker.js';
export { calibrate, fitIsotonic, fitPlatt, reliabilityTable } from './calibration.js';
export type { IsotonicMap, PlattScaling } from './calibration.js';
export { CAUTION } from './caution.js';
export { createClaimStream } from './claim-stream.js';
export type { ClaimStream, ReleasedPiece } from './claim-stream.js';
export { CompletionError, createCompletionClient } from './completion.js';
export type { CompletionClientOptions, CompletionFailure } from './completion.js';
export { buildContext, fitContext } from './context.js';
export type { BuildContextOptions } from './context.js';
export { extractAnswer, chooseSentences } from './extractive.js';
export { QUESTION_FEATURES, SENTENCE_FEATURES, decide, logistic, questionFeatures, readAnswerModel } from './evidence.js';
export type { AnswerModel, LinearModel } from './evidence.js';
export { FITTED_MODEL } from './fitted-model.js';
export { createLexiconSource, parseTermsFile } from './lexicon-source.js';
export { buildVocabulary } from './vocabulary.js';
export { bundledWordVectorsFile, neighbourIndex, readWordVectors, softCoverage, wordVectorsSetting } from './word-vectors.js';
export type { NeighbourIndex, WordVectors } from './word-vectors.js';
export type { ExtractOptions, ExtractResult } from './extractive.js';
export { checkGrounding } from './grounding.js';
export type { GroundedClaim, GroundingOptions, GroundingResult } from './grounding.js';
export { SYSTEM_PROMPT, buildMessages } from './prompt.js';
export type { PromptMessage } from './prompt.js';
export { REWRITE_PROMPT, rewriteQuestion } from './rewrite.js';
export type { HistoryTurn, Rewrite, RewriteMethod } from './rewrite.js';
export { readEventStream, sseFrame } from './sse.js';
export { TOKENIZER_NAMES, borrowedTokenizer, estimateTokenizer, loadTokenizer } from './tokens.js';
export type { ContextTokenizer, TokenizerName } from './tokens.js';
export type {
  AnswerClaim,
  AnswerExplanation,
  AnswerEvent,
  AnswerLogger,
  AnswerReply,
  ChatMessage,
  CompletionClient,
  ContextReport,
  ContextSource,
  SourcePart,
  SourceSummary,
} from './types.js';
