export { createRatingStore, type NewRating, type Rating, type RatingStore, type RatedSource } from './store.js';
export { keyFigures, ratingsToQuestions, toJsonl, type ExportedQuestion, type ExportResult } from './export.js';
export { exportFeedback } from './command.js';
