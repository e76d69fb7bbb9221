// Follow-up questions made standalone, so retrieval sees what the user is really asking.
// With a completion endpoint the model rewrites the question; offline (or when the model's
// rewrite is unusable) the earlier question's key terms are carried into the follow-up.

import type { ChatMessage, CompletionClient } from './types.js';
import { contentStems, contentTokens, isStopword, tokenize } from './words.js';

export interface HistoryTurn {
  role: 'user' | 'assistant';
  content: string;
}

export type RewriteMethod = 'completion' | 'key_terms';

export interface Rewrite {
  question: string;
  /** How the question was rewritten; absent when it was used as asked. */
  method?: RewriteMethod;
}

// Enough words to carry the topic of the previous question without drowning the follow-up.
const MAX_CARRIED_WORDS = 8;
// The model sees the recent conversation only; older turns rarely matter to a follow-up and
// each one costs tokens and latency.
const REWRITE_TURNS = 6;
const REWRITE_TURN_CHARS = 600;

export const REWRITE_PROMPT = [
  'You rewrite a follow-up question from a conversation into one standalone question.',
  'Keep the user\'s meaning; bring in only the topic words the follow-up leaves implicit.',
  'Do not answer the question. Reply with the rewritten question alone, on one line.',
].join('\n');

/**
 * The standalone form of `question`. Uses the completion endpoint when given one and falls
 * back to `standaloneQuestion` when it fails or replies with something that is not a question
 * of sensible length (an answer, several lines, an empty string).
 */
export async function rewriteQuestion(
  question: string,
  history: HistoryTurn[] | undefined,
  completion: CompletionClient | undefined,
  signal?: AbortSignal,
  alternatives?: AlternativeTest,
): Promise<Rewrite> {
  const q = question.trim();
  const turns = (history ?? []).filter((t) => t.content.trim().length > 0);
  if (!turns.some((t) => t.role === 'user')) return { question: q };
  if (completion) {
    try {
      const reply = await completion.complete(rewriteMessages(q, turns), signal);
      const candidate = usableRewrite(reply, q);
      if (candidate) return { question: candidate, method: 'completion' };
    } catch (err) {
      if (signal?.aborted) throw err;
    }
  }
  const offline = standaloneQuestion(q, turns, alternatives);
  return offline === q ? { question: q } : { question: offline, method: 'key_terms' };
}

export function rewriteMessages(question: string, history: HistoryTurn[]): ChatMessage[] {
  const recent = history.slice(-REWRITE_TURNS).map((t) => {
    const text = t.content.replace(/\s+/g, ' ').trim();
    const cut = text.length > REWRITE_TURN_CHARS ? `${text.slice(0, REWRITE_TURN_CHARS)}…` : text;
    return `${t.role === 'user' ? 'User' : 'Assistant'}: ${cut}`;
  });
  return [
    { role: 'system', content: REWRITE_PROMPT },
    { role: 'user', content: `Conversation:\n${recent.join('\n')}\n\nFollow-up: ${question}` },
  ];
}

function usableRewrite(reply: string, question: string): string | null {
  const line = reply
    .trim()
    .replace(/^(?:standalone question|question|rewritten question)\s*:\s*/i, '')
    .replace(/^["“']+|["”']+$/g, '')
    .trim();
  if (line.length < 3 || /\n/.test(line) || /\[\d+\]/.test(line)) return null;
  if (line.length > question.length * 4 + 200) return null;
  return line;
}

/** Tells whether two words name alternatives of one kind ("tram" and "bus"); see `standaloneQuestion`. */
export type AlternativeTest = (a: string, b: string) => boolean;

/**
 * Offline condensation of a follow-up: the content words of the last user turn that the follow-up
 * does not already contain are put in front of it, so "and for trams?" after a question about
 * delay refunds retrieves delay-refund passages. A carried word that the follow-up replaces is left
 * behind: one in a phrase opened by the same preposition ("for an adult ticket" when it asks "and for a
 * child ticket?"), one of the same class (a month for a month, a weekday for a weekday, a number
 * for a number), a modifier of a noun both name ("Zone B" when it asks "what about Zone C?"), and,
 * given `alternatives` (WordNet co-hyponyms), a word of the same kind ("tram" when it asks "and by
 * coach?"). A follow-up without its own question opener keeps the previous one
 * ("how long ..."), since it asks for the same kind of fact.
 */
export function standaloneQuestion(question: string, history?: HistoryTurn[], alternatives?: AlternativeTest): string {
  const q = question.trim();
  const lastUser = [...(history ?? [])].reverse().find((t) => t.role === 'user');
  if (!lastUser) return q;
  const prev = lastUser.content;
  const have = contentStems(q);
  const followTokens = contentTokens(q);
  const replaced = new Set<string>();
  // Phrases opened by a preposition the follow-up also opens a phrase with.
  for (const prep of prepositionsOf(q)) {
    // The phrase runs to the next preposition, conjunction, verb "to be" or punctuation, four words at most
    // (a particle such as "packed in" must not swallow the rest of the sentence).
    for (const m of prev.matchAll(new RegExp(`\\b${prep}\\s+((?:[\\p{L}\\p{N}'’-]+\\s*){1,4}?)(?=\\s+(?:${[...PREPOSITIONS, ...PHRASE_ENDS].join('|')})\\b|\\s*[,.;:?!]|$)`, 'giu'))) {
      for (const t of contentTokens(m[1] ?? '')) replaced.add(t.stem);
    }
  }
  // Tokens of a class the follow-up names too.
  for (const cls of TOKEN_CLASSES) {
    if (followTokens.some((t) => cls.test(t.word))) for (const t of contentTokens(prev)) if (cls.test(t.word)) replaced.add(t.stem);
  }
  // Modifiers next to a noun both questions name.
  const prevTokens = tokenize(prev);
  prevTokens.forEach((t, i) => {
    if (!have.has(t.stem) || isStopword(t.word)) return;
    for (const n of [prevTokens[i - 1], prevTokens[i + 1]]) if (n && !have.has(n.stem) && n.word.length <= 3) replaced.add(n.stem);
  });
  // A labelled noun the follow-up names with another label ("Band A" after "Band B").
  const heads = new Set(followTokens.filter((t) => t.stem.includes(' ')).map((t) => t.stem.split(' ')[0]));
  for (const t of contentTokens(prev)) if (t.stem.includes(' ') && heads.has(t.stem.split(' ')[0]) && !have.has(t.stem)) replaced.add(t.stem);
  const carried: string[] = [];
  const seen = new Set<string>();
  for (const t of contentTokens(prev)) {
    if (have.has(t.stem) || seen.has(t.stem)) continue;
    seen.add(t.stem);
    if (replaced.has(t.stem)) continue;
    if (alternatives && followTokens.some((f) => f.word.length > 2 && alternatives(t.word, f.word))) continue;
    carried.push(prev.slice(t.start, t.end));
    if (carried.length >= MAX_CARRIED_WORDS) break;
  }
  if (carried.length === 0) return q;
  // The previous question's opener wherever it stands ("For a public swim, how many ...").
  const opener = OPENER.test(q) ? null : (ASKED.exec(prev)?.[0] ?? null);
  return `${opener ? `${opener.toLowerCase()} ` : ''}${carried.join(' ')} ${q}`;
}

const PREPOSITIONS = ['in', 'on', 'for', 'at', 'with', 'by', 'under', 'over', 'during', 'from', 'to', 'after', 'before'];
const PHRASE_ENDS = ['and', 'or', 'but', 'that', 'which', 'who', 'is', 'are', 'was', 'were', 'has', 'have', 'will', 'can'];

function prepositionsOf(text: string): string[] {
  const out = new Set<string>();
  for (const t of tokenize(text)) if (PREPOSITIONS.includes(t.word) && t.word !== 'to') out.add(t.word);
  return [...out];
}

// Classes of token where one replaces another of the same class: general calendar and number words.
const TOKEN_CLASSES: readonly RegExp[] = [
  /^(?:january|february|march|april|may|june|july|august|september|october|november|december|spring|summer|autumn|fall|winter)$/i,
  /^(?:monday|tuesday|wednesday|thursday|friday|saturday|sunday|weekday|weekend)s?$/i,
  /^\d+(?:[.,]\d+)?$/,
];

// Openers that fix the kind of fact asked for.
const OPENER = /^\W*(?:(?:and|but|so|then|also)\s+)?(?:how (?:long|soon|quickly|much|many|far|old|often)|when|where|what time|who|which)\b/i;
const ASKED = /\b(?:how (?:long|soon|quickly|much|many|far|old|often)|when|where|what time|who|which)\b/i;
