/** The one interface every embedder implements. Vectors are L2-normalised Float32Arrays. */
export interface Embedder {
  /** Stable id of the model and its settings, e.g. "hashing-v1-4096" or "Xenova/all-MiniLM-L6-v2@q8".
   * Stored with every vector and with each index: an index built with one id is never queried with another. */
  readonly id: string;
  readonly dimensions: number;
  /** True for a learned sentence-embedding model; false for the built-in hashing fallback. */
  readonly semantic: boolean;
  /** Most tokens one input may have before the model truncates it. */
  readonly maxTokens: number;
  /** Tokens of `text` in this embedder's own tokenizer (without special tokens such as [CLS]/[SEP]). */
  countTokens(text: string): number;
  /** Embeds a batch; one L2-normalised vector per input, same order. */
  embed(texts: string[]): Promise<Float32Array[]>;
}
