// Shapes used inside the answer stage and by its callers.

/** One original retrieval chunk inside a (possibly merged) context source. */
export interface SourcePart {
  start: number;
  end: number;
  page: number | null;
  pageEnd: number | null;
  section: string;
}

/** A numbered passage placed in the context window. `text` is an exact slice of the document. */
export interface ContextSource {
  /** 1-based number the model cites as [n]. */
  n: number;
  documentId: string;
  source: string;
  title: string;
  page: number | null;
  pageEnd: number | null;
  section: string;
  text: string;
  start: number;
  end: number;
  effectiveDate: string | null;
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
}

/** The subset of a pino logger the answer stage uses. */
export interface AnswerLogger {
  info(obj: object, msg?: string): void;
  warn(obj: object, msg?: string): void;
  debug(obj: object, msg?: string): void;
}
