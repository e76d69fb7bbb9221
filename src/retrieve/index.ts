export {
  createRetriever,
  retrieverOptions,
  DEFAULT_FIELD_WEIGHTS,
  DEFAULT_TUNING,
  type Retriever,
  type RetrieveRequest,
  type RetrieverOptions,
  type RetrievalSettings,
  type LexicalEngine,
} from './retriever.js';
export { createLexicalMemory, type LexicalMemory, type LexicalMemoryStats } from './lexical-memory.js';
export { createLexicalChangeThread, type LexicalChangeReader } from './lexical-thread.js';
export { reciprocalRankFusion, type RankedList, type FusedItem } from './rrf.js';
export { toWeightedMatch, termCounts, queryTerms, STOP_WORDS, type WeightedTerm } from './query-text.js';
export { rm3Expand, DEFAULT_RM3, type Rm3Options } from './rm3.js';
export { mmrSelect, jaccard, DEFAULT_MMR, type MmrOptions, type MmrItem } from './mmr.js';
export { createWordNet, packagedWordNetDir, type SynonymSource } from './wordnet.js';
export type { RetrieveFilter } from './filter.js';
