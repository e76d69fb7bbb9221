// The shapes the desk reads from and sends to the service, taken from the API's own zod schemas
// (src/api/replies.ts, src/api/schemas.ts). Type-only imports: the compiled page carries no zod.

import type { z } from 'zod';
import type { answerReply, citation, claim, collectionsReply, deltaEvent, originalLink, passage, sourcesEvent, sourceSummary, streamErrorEvent } from '../api/replies.js';
import type { historyTurn, ratingBody } from '../api/schemas.js';

export type Citation = z.infer<typeof citation>;
export type Claim = z.infer<typeof claim>;
/** A numbered context passage (the `sources` event): what abstentions offer as the closest passages. */
export type SourceSummary = z.infer<typeof sourceSummary>;
/** The `done` event: the whole answer. */
export type AnswerDone = z.infer<typeof answerReply>;
export type Passage = z.infer<typeof passage>;
export type Turn = z.infer<typeof historyTurn>;
export type SourcesEvent = z.infer<typeof sourcesEvent>;
export type DeltaEvent = z.infer<typeof deltaEvent>;
export type StreamErrorEvent = z.infer<typeof streamErrorEvent>;
export type Collections = z.infer<typeof collectionsReply>;
export type OriginalLink = z.infer<typeof originalLink>;
export type RatingRequest = z.input<ReturnType<typeof ratingBody>>;
