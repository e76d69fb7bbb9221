// Bounds on the work one document may cause. A hostile or runaway file (a ZIP bomb, a 50 MB line, HTML nested
// thousands deep) must end as a failed document with a reason, found in bounded memory and time, never as a
// worker that runs out of heap or stack. Each bound is checked before the work it limits.

/** The per-document limits (options under `limits` in the configuration). */
export interface DocumentLimits {
  /** Most characters of text taken from one document. */
  maxChars: number;
  /** Most chunks made from one document. */
  maxChunks: number;
  /** Time to read, normalise and chunk one document, in seconds. */
  parseMaxSeconds: number;
  /** Deepest element nesting read in HTML (web pages and converted Word files). */
  htmlMaxDepth: number;
  /** Most bytes a ZIP package (a .docx) may inflate to, all entries together. */
  zipMaxInflatedBytes: number;
  /** Most entries in a ZIP package. */
  zipMaxEntries: number;
  /** Most distinct words in one document (the size of what its words add to the indexes). */
  maxDistinctWords: number;
}

/** The configuration's defaults, for callers (tests, evaluation loaders) that pass none. */
export const DEFAULT_DOCUMENT_LIMITS: DocumentLimits = {
  maxChars: 5_000_000,
  maxChunks: 10_000,
  parseMaxSeconds: 120,
  htmlMaxDepth: 512,
  zipMaxInflatedBytes: 64 * 1024 * 1024,
  zipMaxEntries: 2000,
  maxDistinctWords: 100_000,
};

/** A document refused for passing a limit; the message names the option (`limits.<name>`). */
export class LimitExceeded extends Error {
  constructor(
    /** The option's name under `limits`. */
    readonly limit: string,
    message: string,
  ) {
    super(message);
    this.name = 'LimitExceeded';
  }
}

const fmt = (n: number): string => n.toLocaleString('en-US');

/** Throws when `count` characters pass `limits.documentMaxChars`. */
export function checkChars(count: number, limits: Pick<DocumentLimits, 'maxChars'>, what = 'the document has'): void {
  if (count > limits.maxChars) {
    throw new LimitExceeded(
      'documentMaxChars',
      `${what} ${fmt(count)} characters of text, over the limit of ${fmt(limits.maxChars)} (limits.documentMaxChars)`,
    );
  }
}

const WORD_RE = /[\p{L}\p{N}]+/gu;

/**
 * Throws when the text holds more distinct words than `limits.documentMaxDistinctWords`. The in-memory
 * lexical index, FTS5's vocabulary and the answer step's spelling index all grow with distinct words, not
 * with length: a 4.9 MB line of 620,000 different tokens cost the service over 1 GB, a prose document of the
 * same length a fraction of that. Counting stops at the limit, so the check itself is bounded too.
 */
export function checkDistinctWords(text: string, limits: Pick<DocumentLimits, 'maxDistinctWords'>): void {
  const seen = new Set<string>();
  for (const m of text.matchAll(WORD_RE)) {
    seen.add(m[0].toLowerCase());
    if (seen.size > limits.maxDistinctWords) {
      throw new LimitExceeded(
        'documentMaxDistinctWords',
        `the document has more than ${fmt(limits.maxDistinctWords)} distinct words (limits.documentMaxDistinctWords); stopped at character ${fmt(m.index)} of ${fmt(text.length)}`,
      );
    }
  }
}

/**
 * A wall-clock budget for one document's parse, checked between steps. A single synchronous step is not
 * interrupted; the size limits bound how long any one step can take.
 */
export interface Deadline {
  /** Throws LimitExceeded once the budget is spent; `step` says where the work was. */
  check(step: string): void;
}

export function startDeadline(seconds: number, now: () => number = () => performance.now()): Deadline {
  const started = now();
  return {
    check(step) {
      const spent = (now() - started) / 1000;
      if (spent > seconds) {
        throw new LimitExceeded(
          'parseMaxSeconds',
          `reading the document took longer than ${seconds} s (limits.parseMaxSeconds); stopped while ${step}`,
        );
      }
    },
  };
}

/** A deadline that never passes, for callers without a budget. */
export const NO_DEADLINE: Deadline = { check() {} };
