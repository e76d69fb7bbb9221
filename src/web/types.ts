// The shapes the desk reads from the service (docs/api.md). Kept here, free of DOM and Node types,
// so the unit tests and the page share them.

export interface Citation {
  n: number;
  documentId: string;
  source: string;
  title: string;
  page: number | null;
  section: string;
  quote: string;
  start: number;
  end: number;
  effectiveDate: string | null;
  version?: string | null;
}

export interface Claim {
  text: string;
  sources: number[];
  supported: boolean;
  support?: number;
  /** Why an unsupported claim failed its check (see docs/api.md). */
  reason?: 'citation' | 'planted' | 'overlap' | 'figure' | 'polarity';
}

/** A numbered context passage (the `sources` event): what abstentions offer as the closest passages. */
export interface SourceSummary {
  n: number;
  documentId: string;
  source: string;
  title: string;
  page: number | null;
  pageEnd: number | null;
  section: string;
  effectiveDate: string | null;
  version?: string | null;
  text: string;
}

/** The `done` event: the whole answer. */
export interface AnswerDone {
  answer: string;
  abstained: boolean;
  mode: string;
  citations: Citation[];
  claims?: Claim[];
  confidence: number;
  confidenceCalibrated?: boolean;
  caution: string;
  question: string;
  rewrittenBy?: string;
  abstainReason?: string;
}

export interface Passage {
  documentId: string;
  source: string;
  title: string;
  format: string;
  effectiveDate: string | null;
  section: string;
  page: number | null;
  pageEnd: number | null;
  before: string;
  quote: string;
  after: string;
}

export interface Turn {
  role: 'user' | 'assistant';
  content: string;
}
