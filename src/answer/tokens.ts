// Token counting in the completion model's tokenizer, so the context budget means what the
// model will see. The BPE encodings come from gpt-tokenizer (pure JS, offline); any other
// model is counted by a rule of thumb and every report says the count is an estimate.

export type TokenizerName = 'cl100k_base' | 'o200k_base' | 'estimate';

export const TOKENIZER_NAMES: readonly TokenizerName[] = ['cl100k_base', 'o200k_base', 'estimate'];

export interface ContextTokenizer {
  /** Encoding name, or "estimate" / "embedder:<id>" for approximate counts. */
  readonly name: string;
  /** False when counts only approximate the completion model's tokens. */
  readonly exact: boolean;
  count(text: string): number;
}

// About four characters per token for English prose in the common BPE vocabularies (a rule
// of thumb from memory, not measured here); rounded up so the budget errs on the safe side.
const CHARS_PER_TOKEN = 4;

export function estimateTokenizer(): ContextTokenizer {
  return { name: 'estimate', exact: false, count: (text) => Math.ceil(text.length / CHARS_PER_TOKEN) };
}

/** Counts with another tokenizer (the embedder's, by default) and says it is an estimate. */
export function borrowedTokenizer(name: string, count: (text: string) => number): ContextTokenizer {
  return { name, exact: false, count };
}

// Document text is data: a literal "<|endoftext|>" in a policy must be counted as plain text,
// not rejected (the library throws on special tokens unless told otherwise).
const PLAIN = { disallowedSpecial: new Set<string>() };

/**
 * Loads an encoding on demand: each rank table costs about half a second and tens of MB to
 * load, so only the configured one is imported.
 */
export async function loadTokenizer(name: TokenizerName): Promise<ContextTokenizer> {
  if (name === 'estimate') return estimateTokenizer();
  const lib =
    name === 'cl100k_base'
      ? await import('gpt-tokenizer/encoding/cl100k_base')
      : await import('gpt-tokenizer/encoding/o200k_base');
  return { name, exact: true, count: (text) => lib.countTokens(text, PLAIN) };
}
