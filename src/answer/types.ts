// Shapes used inside the answer stage and by its callers.

import type { AnswerResult, Citation, PageBreak, PassagePlace } from '../types.js';

/** One original retrieval chunk inside a (possibly merged) context source. */
export interface SourcePart {
  start: number;
  end: number;
  /** The page of the chunk's first character. */
  page: number | null;
  pageEnd: number | null;
  /** Pages that begin inside the chunk, in document offsets (absent when none are recorded). */
  pageBreaks?: PageBreak[];
  section: string;
}

/** A numbered passage placed in the context window. `text` is an exact slice of the document. */
export interface ContextSource extends PassagePlace {
  /** 1-based number the model cites as [n]. */
  n: number;
  text: string;
  start: number;
  end: number;
  /** Best fused retrieval score among the merged chunks. */
  score: number;
  denseScore?: number;
  lexicalRank?: number;
  /** The chunks merged into this source, in document order (used to place quotes on the right page). */
  parts: SourcePart[];
}

export interface ChatMessage {
  role: 'system' | 'user' | 'assistant';
  content: string;
}

export interface CompletionClient {
  complete(messages: ChatMessage[], signal?: AbortSignal): Promise<string>;
  /**
   * The same call with server-sent events: `onDelta` gets each text piece as it arrives and
   * the promise resolves with the whole reply once the stream ends properly.
   */
  stream?(messages: ChatMessage[], onDelta: (text: string) => void, signal?: AbortSignal): Promise<string>;
}

/** The subset of a pino logger the answer stage uses. */
export interface AnswerLogger {
  info(obj: object, msg?: string): void;
  warn(obj: object, msg?: string): void;
  debug(obj: object, msg?: string): void;
}

/** One answer sentence and how well the sources it cites support it. */
export interface AnswerClaim {
  /** The sentence without its citation markers. */
  text: string;
  /** Citation numbers (as in `citations[].n`) the sentence cites. */
  sources: number[];
  supported: boolean;
  /** Share of the sentence's content words found in its cited passages, 0..1. */
  support: number;
  /** On an unsupported sentence, the check it failed: `citation`, `planted`, `overlap`, `figure` or `polarity`. */
  reason?: 'citation' | 'planted' | 'overlap' | 'figure' | 'polarity';
}

/** How the context window was filled. */
export interface ContextReport {
  sources: number;
  /** Tokens of the rendered source blocks. */
  tokens: number;
  budgetTokens: number;
  /** Encoding the tokens were counted in. */
  tokenizer: string;
  /** True when `tokenizer` only approximates the completion model's own tokenizer. */
  estimated: boolean;
}

/** The reply of the answer stage: the shared AnswerResult plus the grounding detail. */
export interface AnswerReply extends AnswerResult {
  claims: AnswerClaim[];
  /** The raw evidence score that `confidence` calibrates, 0..1. */
  evidence: number;
  /**
   * True when `confidence` is calibrated (the share of such answers that were right on corpora the
   * fit did not see); false when it is the raw score of a set-up the models were never fitted on.
   */
  confidenceCalibrated?: boolean;
  /** With a calibrated confidence: the largest gap between stated confidence and share correct seen on held-out corpora. */
  confidenceError?: number;
  abstainReason?: string;
  context: ContextReport;
  /** Present when `question` is a rewrite of a follow-up. */
  rewrittenBy?: 'completion' | 'key_terms';
  /** The evidence features the abstention model weighed (see evidence.ts); internal, for evaluation. */
  features?: Record<string, number>;
  /** Everything the decision saw, for fitting (`explain: true` requests only; never sent by the API). */
  explanation?: AnswerExplanation;
}

export interface AnswerExplanation {
  decision: number;
  terms: { label: string; known: boolean; light: boolean; weight: number }[];
  ranked: { source: string; text: string; features: number[]; p: number }[];
}

/** A context source as shown to clients while the answer is produced. */
export interface SourceSummary extends PassagePlace {
  n: number;
  text: string;
}

/**
 * Progress of one answer. `delta` pieces joined make the final answer; a delta with
 * `reset: true` replaces everything sent before it (an abandoned generation), and
 * `citations` carries the citations a piece uses for the first time.
 */
export type AnswerEvent =
  | { type: 'sources'; sources: SourceSummary[] }
  | { type: 'delta'; text: string; reset?: true; citations?: Citation[] };
