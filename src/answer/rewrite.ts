// Follow-up questions made standalone, so retrieval sees what the user is really asking.
// With a completion endpoint the model rewrites the question; offline (or when the model's
// rewrite is unusable) the earlier question's key terms are carried into the follow-up.

import type { ChatMessage, CompletionClient } from './types.js';
import { contentStems, contentTokens, stem } from './words.js';

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
  const offline = standaloneQuestion(q, turns);
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

/**
 * Offline condensation of a follow-up: the content words of the last user turn that the
 * follow-up does not already contain are put in front of it, so "and for trams?" after a
 * question about delay refunds retrieves delay-refund passages. A carried word of the same
 * kind as one the follow-up names ("trams" when it asks "and on buses?") is the thing being
 * swapped, so it is left behind; and a follow-up without its own question opener keeps the
 * previous one ("how long ..."), since it asks for the same kind of fact.
 */
export function standaloneQuestion(question: string, history?: HistoryTurn[]): string {
  const q = question.trim();
  const lastUser = [...(history ?? [])].reverse().find((t) => t.role === 'user');
  if (!lastUser) return q;
  const have = contentStems(q);
  const swapped = new Set<number>();
  CONTRASTS.forEach((row, i) => {
    if (row.some((w) => have.has(w))) swapped.add(i);
  });
  const carried: string[] = [];
  const seen = new Set<string>();
  for (const t of contentTokens(lastUser.content)) {
    if (have.has(t.stem) || seen.has(t.stem)) continue;
    seen.add(t.stem);
    if (CONTRASTS.some((row, i) => swapped.has(i) && row.includes(t.stem))) continue;
    carried.push(lastUser.content.slice(t.start, t.end));
    if (carried.length >= MAX_CARRIED_WORDS) break;
  }
  if (carried.length === 0) return q;
  const opener = OPENER.test(q) ? null : (OPENER.exec(lastUser.content.trim())?.[0] ?? null);
  return `${opener ? `${opener.toLowerCase()} ` : ''}${carried.join(' ')} ${q}`;
}


// Words that name alternatives of one kind: a follow-up naming one replaces the other.
const CONTRASTS: readonly string[][] = [
  ['tram', 'bus', 'train', 'coach', 'ferry'],
  ['adult', 'child', 'senior', 'student', 'infant'],
  ['weekday', 'weekend', 'saturday', 'sunday'],
  ['single', 'return', 'season'],
].map((row) => row.map((w) => stem(w)));

// Openers that fix the kind of fact asked for.
const OPENER = /^\W*(?:how (?:long|soon|quickly|much|many|far|old|often)|when|where|what time)\b/i;

