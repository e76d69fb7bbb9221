export type { NewRating, Rating, RatingStore, RatedSource } from '../store/index.js';
export { keyFigures, ratingsToQuestions, toJsonl, type ExportedQuestion, type ExportResult } from './export.js';
export { exportFeedback } from './command.js';
