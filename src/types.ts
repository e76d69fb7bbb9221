// Plain data types that pipeline stages hand to each other. No stage imports another
// stage's internals; they agree on these shapes instead.

/** Formats the loaders understand. */
export type DocumentFormat = 'pdf' | 'docx' | 'markdown' | 'html' | 'text';

/** One structural unit of a loaded document, in reading order. */
export interface Block {
  kind: 'heading' | 'paragraph' | 'list' | 'table' | 'code';
  /** Text of the block, already normalised (NFC, single spaces inside lines, no control chars). */
  text: string;
  /** Heading level 1..6 for headings. */
  level?: number;
  /** 1-based page number, for paged formats (PDF). */
  page?: number;
  /** Last page, when a paragraph runs on over a page break. */
  pageEnd?: number;
  /** Where later pages begin inside the block's text, for a paragraph that runs on over a page break. */
  pageBreaks?: PageBreak[];
}

/**
 * A page that begins inside a span of text: `page` starts at character `at`. In a Block, `at` is an
 * offset into the block's text; in chunks and search hits, an offset into the document's normalised text.
 */
export interface PageBreak {
  at: number;
  page: number;
}

/** What a loader returns for one file. */
export interface LoadedDocument {
  format: DocumentFormat;
  /** Title from metadata, the first heading, or the file name. */
  title: string;
  blocks: Block[];
  /** Number of pages for paged formats, else null. */
  pageCount: number | null;
  /** Effective date in ISO form (YYYY-MM-DD) when the document states one. */
  effectiveDate: string | null;
  /** Free-form metadata (front matter, PDF info). */
  metadata: Record<string, string>;
}

/** A block placed in the document's normalised text. */
export interface PlacedBlock extends Block {
  /** Character offsets into NormalisedDocument.text: text.slice(start, end) === block.text */
  start: number;
  end: number;
  /** Headings above this block, outermost first (a heading block's own path includes itself). */
  headingPath: string[];
}

/** A document as one normalised string plus its placed blocks. Blocks are joined by "\n\n". */
export interface NormalisedDocument {
  text: string;
  blocks: PlacedBlock[];
}

/** Where a chunk lies in its document: offsets, headings and pages. */
export interface ChunkPlace {
  start: number;
  end: number;
  headingPath: string[];
  /** The page of the chunk's first character. */
  pageStart: number | null;
  pageEnd: number | null;
}

/** A chunk's text with its place and the pages that begin inside it. */
export interface PlacedChunkText extends ChunkPlace {
  /** Exactly the document's normalised text sliced at [start, end). */
  text: string;
  /** Pages that begin after the chunk's first character, in document offsets (empty when it sits on one page). */
  pageBreaks: PageBreak[];
}

/** A chunk produced by the chunker, before it is stored. */
export interface ChunkDraft extends PlacedChunkText {
  ordinal: number;
  /** Tokens of `text` in the embedder's tokenizer. */
  tokenCount: number;
}

/** A passage's document and where in it: shared by search hits, context sources and source summaries. */
export interface PassagePlace {
  documentId: string;
  source: string;
  title: string;
  page: number | null;
  pageEnd: number | null;
  section: string;
  effectiveDate: string | null;
  /** The document's stated version or issue ("Issue 4", "v2.1"), when it states one. */
  version?: string | null;
}

/** Counts tokens the way the active embedder's tokenizer does. */
export type TokenCounter = (text: string) => number;

/** A retrieval hit as returned by the retriever and /v1/search. */
export interface SearchHit extends PassagePlace {
  chunkId: number;
  /** Pages that begin inside the chunk after `page`, in document offsets; absent when none are recorded. */
  pageBreaks?: PageBreak[];
  headingPath: string[];
  text: string;
  start: number;
  end: number;
  score: number;
  /** Per-leg ranks (1-based) where the chunk appeared, for explanation and calibration. */
  ranks: { lexical?: number; dense?: number };
  /** Best cosine similarity from the dense leg, when it saw this chunk. */
  denseScore?: number;
}

export type SearchMode = 'hybrid' | 'lexical' | 'dense';

/** Narrows a search to some documents: by id and/or by exact values of document metadata keys. */
export interface DocumentFilter {
  documentIds?: readonly string[];
  metadata?: Readonly<Record<string, string>>;
}

/** What a search asks for: the retriever's input, and what the answer stage asks of it. */
export interface RetrieveRequest {
  query: string;
  collection: string;
  k: number;
  mode: SearchMode;
  /** Only these documents (by id and/or metadata values). */
  filter?: DocumentFilter;
  /** Overrides the retriever's MMR setting for this request (true = on with the configured or default options). */
  diversify?: boolean;
}

export interface Citation {
  n: number;
  documentId: string;
  source: string;
  title: string;
  /** The page where the quote's first character is (PDF). */
  page: number | null;
  section: string;
  quote: string;
  /** Character span of the quote in the document's normalised text. */
  start: number;
  end: number;
  effectiveDate: string | null;
  /** The document's stated version or issue, when it states one. */
  version?: string | null;
}

export type AnswerMode = 'generative' | 'extractive';

export interface AnswerResult {
  answer: string;
  abstained: boolean;
  mode: AnswerMode;
  citations: Citation[];
  confidence: number;
  caution: string;
  fallbackReason?: string;
  question: string;
  timings: Record<string, number>;
}

/** The labels every question of a labelled set carries (docs/eval-answers.md). */
export interface QuestionLabel {
  id: string;
  question: string;
  answerable: boolean;
  /** Path of the document holding the answer, as written in the set (compared by file name). */
  doc: string | null;
  page: number | null;
  section: string | null;
}
