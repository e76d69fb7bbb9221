// What the HTTP layer needs from the rest of the service: the composition root (src/runtime.ts) provides it,
// tests pass their own. The routes import these types from here, not from app.ts, so imports run one way.

import type { AnswerEvent } from '../answer/index.js';
import type { DocumentService, QueueHealth } from '../jobs/index.js';
import type { Logger } from '../logger.js';
import type { AnswerResult, DocumentFilter, RetrieveRequest, SearchHit, SearchMode } from '../types.js';
import type { DeskService } from './desk-service.js';
import type { Metrics } from './metrics.js';

export interface AnswerRequest {
  question: string;
  collection: string;
  history?: { role: 'user' | 'assistant'; content: string }[];
  k?: number;
  mode?: SearchMode;
  filter?: DocumentFilter;
  /** "extractive" never calls the completion endpoint. */
  style?: 'auto' | 'extractive';
  signal?: AbortSignal;
  /** Progress events for a streamed answer (sources, text deltas, done). */
  onEvent?: (e: AnswerEvent) => void;
}

/** What the HTTP layer needs from the rest of the service. Tests pass their own. */
export interface AppDeps {
  logger: Logger;
  search(req: RetrieveRequest): Promise<SearchHit[]>;
  answer(req: AnswerRequest): Promise<AnswerResult>;
  /** Ready for everything; or, given a collection, ready to answer in it. */
  isReady(collection?: string): boolean;
  health(): Record<string, unknown>;
  /** The job queue's state; with it, `/health` answers 503 while the queue is down. */
  queueHealth?(): QueueHealth;
  collections(): { name: string; documents: number; chunks: number; embedderId: string | null }[];
  metrics?: Metrics;
  /** The document API; absent in read-only deployments and some tests. */
  documents?: DocumentService;
  /** Passages, original files and ratings for the reference desk; absent in some tests. */
  desk?: DeskService;
  /** Folder of the built desk page (dist/web); the default is found next to the compiled code. */
  deskAssetsDir?: string;
  /**
   * The change-log position the node's indexes hold (PostgreSQL back end): read when a search or an answer
   * starts, and returned with it as `indexPosition`. Absent on the embedded back end.
   */
  indexPosition?(): number;
  /** Milliseconds since the epoch, for the rate limiter's windows (tests pass their own). */
  now?: () => number;
}
