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
}

/** The configuration's defaults, for callers (tests, evaluation loaders) that pass none. */
export const DEFAULT_DOCUMENT_LIMITS: DocumentLimits = {
  maxChars: 5_000_000,
  maxChunks: 10_000,
  parseMaxSeconds: 120,
  htmlMaxDepth: 512,
  zipMaxInflatedBytes: 64 * 1024 * 1024,
  zipMaxEntries: 2000,
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
