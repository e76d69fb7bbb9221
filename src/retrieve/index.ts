export { createRetriever, DEFAULT_FIELD_WEIGHTS, type Retriever, type RetrieveRequest, type RetrieverOptions } from './retriever.js';
export { reciprocalRankFusion, type RankedList, type FusedItem } from './rrf.js';
export { toMatchExpression, contentTerms, queryTerms, STOP_WORDS } from './query-text.js';
