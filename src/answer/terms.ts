// The question's content terms and the ways a sentence can satisfy each.
//
// A term is satisfied exactly by its own stem, or by a member of an operator's synonym group for
// the collection (terms files: docs/configuration.md#terms-files). It is satisfied nearly (at
// NEAR_CREDIT) by a general-language synonym from WordNet, or, when the collection never uses the
// word, by a word of the collection's vocabulary within a small edit distance (a misspelling).
// Nothing here comes from any question set: domain wording belongs to the operator's file.

import type { SynonymSource } from '../retrieve/wordnet.js';
import type { Vocabulary } from './vocabulary.js';
import { contentTokens, isStopword, stem, tokenize } from './words.js';
import type { NeighbourIndex, WordVectors } from './word-vectors.js';

export interface QuestionTerm {
  /** The question's own wording of the term. */
  label: string;
  /** Ways to satisfy the term fully: each is a list of stems that must all be present. */
  alts: string[][];
  /** Single stems that satisfy it nearly: WordNet synonyms and spelling corrections found in the collection. */
  near: string[];
  /** Looser relations the collection uses (WordNet hypernyms, derived forms, gloss words): a separate, weaker signal. */
  related: string[];
  /** Surface forms of `related`, for query expansion. */
  relatedWords?: string[];
  /** The collection never uses the term's own wording (some word of each alternative is missing). */
  outOfVocabulary?: boolean;
  /** Spelling corrections to words the collection uses (also in `near`), with their surface forms. */
  corrections?: { stem: string; word: string }[];
  /** True when the collection uses the term (or one of its alternatives); false when unknown there. */
  known: boolean;
}

/** Credit for a term satisfied by a synonym or a corrected spelling rather than its own word. */
export const NEAR_CREDIT = 0.8;

// Related words added to the query per unknown question word.
const RELATED_EXPANSIONS = 3;

// Word-vector expansion: at most two collection words a question term, each at cosine 0.6 or more. Set
// before any measurement, not fitted (0.5 with three words was also run on the shared sets' loss ladder
// and was no better on both); docs/eval-answers.md.
const NEIGHBOURS_PER_TERM = 2;
const NEIGHBOUR_MIN_COSINE = 0.6;

// A related word held by more than this share of the collection's lines says nothing about a sentence.
const RELATED_MAX_SHARE = 0.05;

export interface Lexicon {
  /** The operator's synonym groups for this collection: each row one meaning. */
  groups?: readonly (readonly string[])[];
  /** General-language synonyms. */
  synonyms?: SynonymSource;
  /** The collection's vocabulary (for corrections and to know which words it uses). */
  vocabulary?: Vocabulary;
  /** General-language word vectors (soft term matching). */
  vectors?: WordVectors;
  /** The collection's words nearest to a word by those vectors (query expansion). */
  neighbours?: NeighbourIndex;
}

// Everyday verbs, adverbs and fillers that questions use to frame a topic without naming it ("make
// a claim", "is it OK to bring"). Written from general knowledge of English question phrasing, not
// from any question list; they still count, but weigh little when judging coverage.
const LIGHT = new Set(
  (
    'make made take took taken put get got give given gave go goes going come came need needed want like use used ' +
    'know tell told say said see look ask asked feel bring brought happen happens try still just really ' +
    'ok okay anything something everything thing things way lot actually quite ' +
    'possible able mean means right sure whole certain even kind sort type allow allowed'
  )
    .split(' ')
    .map((w) => stem(w)),
);

/** True for a term that frames the question rather than naming its topic. */
export function isLightTerm(term: QuestionTerm): boolean {
  return term.alts.length === 1 && term.alts[0]?.length === 1 && LIGHT.has(term.alts[0][0] ?? '');
}

interface Member {
  group: number;
  re: RegExp;
  stems: string[];
}

function phraseStems(phrase: string): string[] {
  const content = contentTokens(phrase).map((t) => t.stem);
  return content.length > 0 ? content : tokenize(phrase).map((t) => t.stem);
}

const memberCache = new WeakMap<readonly (readonly string[])[], Member[]>();

function membersOf(groups: readonly (readonly string[])[]): Member[] {
  let m = memberCache.get(groups);
  if (!m) {
    m = groups
      .flatMap((row, group) =>
        row.map((phrase) => ({
          group,
          re: new RegExp(`(?<![\\p{L}\\p{N}])${escapeRe(phrase.trim()).replace(/[-\s]+/g, '[-\\s]+')}(?![\\p{L}\\p{N}])`, 'giu'),
          stems: phraseStems(phrase),
        })),
      )
      .filter((x) => x.stems.length > 0)
      .sort((a, b) => b.re.source.length - a.re.source.length);
    memberCache.set(groups, m);
  }
  return m;
}

/**
 * The question's content terms: operator phrases first (longest wins), then each remaining content
 * word on its own, with its WordNet synonyms and spelling corrections that the collection uses.
 * Duplicates by stem are dropped.
 */
export function questionTerms(question: string, lexicon: Lexicon = {}): QuestionTerm[] {
  const members = lexicon.groups && lexicon.groups.length > 0 ? membersOf(lexicon.groups) : [];
  const vocab = lexicon.vocabulary;
  const taken: boolean[] = new Array<boolean>(question.length).fill(false);
  const found: { at: number; term: QuestionTerm }[] = [];
  for (const m of members) {
    for (const hit of question.matchAll(m.re)) {
      const s = hit.index;
      const e = s + hit[0].length;
      if (taken.slice(s, e).some(Boolean)) continue;
      for (let i = s; i < e; i++) taken[i] = true;
      const alts = members.filter((x) => x.group === m.group).map((x) => x.stems);
      const known = !vocab || alts.some((a) => a.every((st) => vocab.df(st) > 0));
      found.push({ at: s, term: { label: hit[0].toLowerCase(), alts, near: [], related: [], known, outOfVocabulary: !known } });
    }
  }
  for (const t of contentTokens(question)) {
    if (taken.slice(t.start, t.end).some(Boolean)) continue;
    const near: string[] = [];
    const corrections: { stem: string; word: string }[] = [];
    const inVocab = !vocab || vocab.df(t.stem) > 0;
    if (vocab && !inVocab && !/[\d ]/.test(t.word)) {
      // A misspelling of a word the collection uses: the nearest corrections (one distance only).
      const fixes = vocab.corrections(t.word);
      const best = fixes[0]?.distance;
      for (const f of fixes) {
        if (f.distance === best && f.stem !== t.stem && !near.includes(f.stem)) {
          near.push(f.stem);
          corrections.push({ stem: f.stem, word: f.word });
        }
      }
    }
    if (lexicon.synonyms && !/\d/.test(t.word)) {
      for (const s of lexicon.synonyms.synonyms(t.word)) {
        const st = stem(s);
        if (st !== t.stem && !near.includes(st) && (!vocab || vocab.df(st) > 0)) near.push(st);
      }
    }
    const related: string[] = [];
    const relatedWords: string[] = [];
    if (lexicon.synonyms?.related && !/\d/.test(t.word)) {
      // Only related words the collection uses, and not its commonest ones: those would match anything.
      const cap = vocab ? Math.max(3, vocab.lines * RELATED_MAX_SHARE) : Infinity;
      for (const w of lexicon.synonyms.related(t.word)) {
        for (const c of contentTokens(w)) {
          const df = vocab ? vocab.df(c.stem) : 1;
          if (df > 0 && df <= cap && c.stem !== t.stem && !near.includes(c.stem) && !related.includes(c.stem)) {
            related.push(c.stem);
            relatedWords.push(c.word);
          }
        }
      }
    }
    const known = inVocab || near.length > 0;
    found.push({ at: t.start, term: { label: t.word, alts: [[t.stem]], near, related, relatedWords, known, outOfVocabulary: !inVocab, corrections } });
  }
  found.sort((a, b) => a.at - b.at);
  const out: QuestionTerm[] = [];
  const seen = new Set<string>();
  for (const { term } of found) {
    const key = term.alts.map((a) => a.join(' ')).sort().join('|');
    if (seen.has(key)) continue;
    seen.add(key);
    out.push(term);
  }
  return out;
}

/** 1 when the stems satisfy the term exactly, NEAR_CREDIT when only nearly, else 0. */
export function termMatch(term: QuestionTerm, stems: ReadonlySet<string>): number {
  if (term.alts.some((alt) => alt.every((s) => stems.has(s)))) return 1;
  if (term.near.some((s) => stems.has(s))) return NEAR_CREDIT;
  return 0;
}

/** True when the stems hold a word related to the term (and it is not otherwise satisfied). */
export function relatedIn(term: QuestionTerm, stems: ReadonlySet<string>): boolean {
  return term.related.some((s) => stems.has(s));
}

/** True when the stems satisfy the term, exactly or nearly. */
export function termIn(term: QuestionTerm, stems: ReadonlySet<string>): boolean {
  return termMatch(term, stems) > 0;
}

/**
 * Words to add to a retrieval query so that lexical search can reach the collection's wording of a
 * term the question phrased its own way: operator alternatives and spelling corrections.
 */
export function expansionWords(question: string, lexicon: Lexicon = {}): string[] {
  const have = new Set(tokenize(question).map((t) => t.stem));
  const out: string[] = [];
  const words = surfaceWords(lexicon);
  const add = (st: string, word: string | undefined): void => {
    if (!word || have.has(st)) return;
    have.add(st);
    out.push(word);
  };
  for (const term of questionTerms(question, lexicon)) {
    // WordNet synonyms stay out of the query: a general synonym of a common word drifts too far;
    // operator alternatives and spelling corrections (of a word the collection lacks) do not.
    for (const alt of term.alts) if (alt.length === 1) add(alt[0] as string, words.get(alt[0] as string));
    for (const c of term.corrections ?? []) add(c.stem, words.get(c.stem) ?? c.word);
    // A word the collection never uses, and cannot be corrected to one, reaches the collection's
    // passages only through related words it does use (WordNet: "radiator" → "heater"); a few of
    // them, the way query expansion for out-of-vocabulary terms has long been done.
    if (term.outOfVocabulary && (term.corrections ?? []).length === 0) {
      for (const w of (term.relatedWords ?? []).slice(0, RELATED_EXPANSIONS)) add(stem(w), w);
    }
  }
  // Everyday words reach the collection's wording through its words nearest in meaning ("automobile" →
  // "car"): word-vector query expansion (Kuzi, Shtok and Kurland, CIKM 2016), a few words a term.
  if (lexicon.neighbours) {
    for (const term of questionTerms(question, lexicon)) {
      if (isLightTerm(term) || /\d/.test(term.label) || term.label.includes(' ')) continue;
      for (const n of lexicon.neighbours.nearest(term.label, NEIGHBOURS_PER_TERM, NEIGHBOUR_MIN_COSINE)) {
        if (!isStopword(n.word)) add(stem(n.word), n.word);
      }
    }
  }
  return out;
}

const surfaceCache = new WeakMap<object, Map<string, string>>();

// The surface word for each single-word stem of the operator's groups, so expansions read as words.
function surfaceWords(lexicon: Lexicon): Map<string, string> {
  const key = lexicon.groups ?? lexicon;
  let m = surfaceCache.get(key);
  if (!m) {
    m = new Map((lexicon.groups ?? []).flat().filter((p) => !/[\s-]/.test(p.trim())).map((p) => [stem(p.trim()), p.trim().toLowerCase()] as const));
    surfaceCache.set(key, m);
  }
  return m;
}

function escapeRe(s: string): string {
  return s.replace(/[.*+?^${}()|[\]\\]/g, '\\$&');
}
