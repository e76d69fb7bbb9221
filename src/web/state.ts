// What the desk holds between events: the enquiry's turns and the answer on screen. One object, created
// by desk.ts and handed to each view, so every view reads and changes the same enquiry.

import type { AnswerDone, SourceSummary, Turn } from './types.js';

// The service accepts at most limits.historyMaxTurns (20 by default) earlier turns.
export const MAX_TURNS = 20;

/** The answer on screen, and what it was asked with. */
export interface Shown {
  asked: string;
  history: Turn[];
  collection: string;
  done: AnswerDone;
  sources: SourceSummary[];
}

export interface DeskState {
  /** Earlier turns of this enquiry, sent with a follow-up. */
  history: Turn[];
  shown: Shown | null;
  /** The question being answered, to abandon when another is asked. */
  inFlight: AbortController | null;
}

export function createState(): DeskState {
  return { history: [], shown: null, inFlight: null };
}
