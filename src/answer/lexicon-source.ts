// Per-collection lexicons for the answer step: the collection's vocabulary (rebuilt when the
// collection changes), the operator's terms file for it (re-read when the file changes), and
// general-language synonyms from WordNet and word vectors.
//
// A terms file is `<termsDir>/<collection>.json`:
//   { "groups": [["reimbursement", "repayment"], ["concession", "reduced fare"]] }
// Each group is one meaning in the collection's trade; a question that words it one way finds
// sentences that word it another. Validated on load; a bad file is reported and ignored. The
// abbreviations the documents define themselves (abbreviations.ts) join the groups unasked.

import { readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import { z } from 'zod';
import type { SynonymSource } from '../retrieve/wordnet.js';
import type { Lexicon } from './terms.js';
import { buildVocabulary, type Vocabulary } from './vocabulary.js';
import { neighbourIndex, type NeighbourIndex, type WordVectors } from './word-vectors.js';

export const termsFileSchema = z
  .object({
    groups: z
      .array(z.array(z.string().trim().min(1).max(80)).min(2).max(50))
      .max(5000)
      .describe('Each group lists words or phrases that mean the same in this collection'),
  })
  .strict();

export type TermsFile = z.infer<typeof termsFileSchema>;

/** Parses a terms file's text; throws an Error naming every problem. */
export function parseTermsFile(text: string, file: string): TermsFile {
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch (err) {
    throw new Error(`${file}: not valid JSON (${(err as Error).message})`);
  }
  const r = termsFileSchema.safeParse(raw);
  if (!r.success) throw new Error(`${file}: ${r.error.issues.map((i) => `${i.path.join('.') || '(root)'}: ${i.message}`).join('; ')}`);
  return r.data;
}

export interface LexiconSourceDeps {
  /** The collection's generation: changes whenever its documents do (null for no such collection). */
  generation(collection: string): number | null;
  /** The texts of the collection's documents. */
  texts(collection: string): Iterable<string>;
  /** Folder of the operator's terms files; null for none. */
  termsDir: string | null;
  synonyms?: SynonymSource;
  /** General-language word vectors (word-vectors.ts), read on first use; undefined when off. */
  wordVectors?: () => WordVectors | undefined;
  onWarning?: (msg: string, detail: Record<string, unknown>) => void;
}

// The collection's words with vectors, built once per vocabulary (a new vocabulary comes with each change).
const neighbourCache = new WeakMap<Vocabulary, NeighbourIndex>();
function neighboursOf(vectors: WordVectors, v: Vocabulary): NeighbourIndex {
  let n = neighbourCache.get(v);
  if (!n) {
    n = neighbourIndex(vectors, v.words());
    neighbourCache.set(v, n);
  }
  return n;
}

export function createLexiconSource(deps: LexiconSourceDeps): (collection: string) => Lexicon {
  const vocabularies = new Map<string, { generation: number; vocab: Vocabulary }>();
  const termFiles = new Map<string, { mtimeMs: number; size: number; groups: TermsFile['groups'] }>();

  const vocabulary = (collection: string): Vocabulary | undefined => {
    const generation = deps.generation(collection);
    if (generation === null) return undefined;
    const hit = vocabularies.get(collection);
    if (hit && hit.generation === generation) return hit.vocab;
    const vocab = buildVocabulary(deps.texts(collection));
    vocabularies.set(collection, { generation, vocab });
    return vocab;
  };

  const groups = (collection: string): TermsFile['groups'] | undefined => {
    if (!deps.termsDir) return undefined;
    const file = path.join(deps.termsDir, `${collection}.json`);
    let st: { mtimeMs: number; size: number };
    try {
      st = statSync(file);
    } catch {
      termFiles.delete(collection);
      return undefined;
    }
    const hit = termFiles.get(collection);
    if (hit && hit.mtimeMs === st.mtimeMs && hit.size === st.size) return hit.groups;
    let parsed: TermsFile['groups'] = [];
    try {
      parsed = parseTermsFile(readFileSync(file, 'utf8'), file).groups;
    } catch (err) {
      deps.onWarning?.('terms file ignored', { file, err: (err as Error).message });
    }
    termFiles.set(collection, { mtimeMs: st.mtimeMs, size: st.size, groups: parsed });
    return parsed;
  };

  // The operator's groups plus the abbreviations the documents define, as one stable array per
  // (vocabulary, terms file) pair: the term matcher caches its patterns by the array.
  const combined = new WeakMap<Vocabulary, { from: TermsFile['groups'] | undefined; groups: TermsFile['groups'] }>();
  const allGroups = (v: Vocabulary | undefined, g: TermsFile['groups'] | undefined): TermsFile['groups'] | undefined => {
    if (!v || v.abbreviations.length === 0) return g;
    const hit = combined.get(v);
    if (hit && hit.from === g) return hit.groups;
    const groups = [...(g ?? []), ...v.abbreviations.map((a) => [a.long, a.short])];
    combined.set(v, { from: g, groups });
    return groups;
  };

  return (collection) => {
    const lex: Lexicon = {};
    const v = vocabulary(collection);
    if (v) lex.vocabulary = v;
    const g = allGroups(v, groups(collection));
    if (g && g.length > 0) lex.groups = g;
    if (deps.synonyms) lex.synonyms = deps.synonyms;
    const vectors = deps.wordVectors?.();
    if (vectors) {
      lex.vectors = vectors;
      if (v) lex.neighbours = neighboursOf(vectors, v);
    }
    return lex;
  };
}
