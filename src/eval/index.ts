export { ndcgAt, averagePrecision, recallAt, reciprocalRankAt, scoreRun, type Judgments, type RetrievalScores } from './metrics.js';
export { readCorpus, readQueries, readQrels, parseQrels, formatRun, type CorpusDoc, type Query } from './data.js';
export { evaluateRetrieval, corpusDocToLoaded, wordNetDir, type RetrievalEvalOptions, type RetrievalEvalResult, type RetrievalTuning } from './retrieval.js';
export { addEvalCommands } from './command.js';
export { evaluateAnswers, readQuestions, scoreAnswer, summarise, type AnswerEvalReport, type LabelledQuestion, type QuestionOutcome } from './answers.js';
