// Turns desk ratings into a labelled question set in the shared question format that
// `sourcebound eval answers` reads (docs/eval-answers.md: id, question, answerable, doc, page,
// section, must_contain[], must_contain_any[], must_not_contain[], follow_up_of, kind, collection),
// with the earlier turns in `history` and where the label came from in `note`.
//
// How a rating becomes a label (docs/api.md, "Ratings"):
//   helpful, answered        → kind "answerable" ("follow-up" with history): expect the first cited
//                              document, its page and section, and the answer's key figures
//                              (amounts, durations, times) in must_contain
//   helpful, abstained       → kind "unanswerable": staff agree the documents do not say
//   not helpful, answered    → kind "unanswerable": until someone writes down the right answer, the
//                              safe expectation is no answer rather than the one staff rejected
//   not helpful, abstained   → skipped: staff expected an answer, but the rating cannot say which one
// Only the latest rating of the same question (same collection and earlier turns) counts.

import type { Rating } from '../store/index.js';
import type { QuestionLabel } from '../types.js';

/** A line of the shared question format (the JSONL keys are snake_case). */
export interface ExportedQuestion extends QuestionLabel {
  must_contain: string[];
  must_contain_any: string[];
  must_not_contain: string[];
  follow_up_of: null;
  kind: 'answerable' | 'follow-up' | 'unanswerable';
  collection: string;
  history?: { role: 'user' | 'assistant'; content: string }[];
  note: string;
}

export interface ExportResult {
  questions: ExportedQuestion[];
  skipped: { id: string; question: string; reason: string }[];
}

// Figures a policy answer turns on: money, percentages, durations, distances, clock times.
const FIGURE =
  /(?:[£€$]\s?\d[\d,]*(?:\.\d+)?|\b\d{1,2}:\d{2}\b|\b\d[\d,]*(?:\.\d+)?\s?(?:%|per cent\b|(?:working |calendar |business )?(?:days?|hours?|minutes?|weeks?|months?|years?)\b|km\b|miles?\b|kg\b|metres?\b|cm\b))/gi;

const MAX_FACTS = 3;

/** Up to three distinct key figures of an answer, in the order they appear, citation markers removed. */
export function keyFigures(answer: string): string[] {
  const text = answer.replace(/\s*\[\d+(?:\s*,\s*\d+)*\]/g, '');
  const out: string[] = [];
  const seen = new Set<string>();
  for (const m of text.matchAll(FIGURE)) {
    const f = m[0].trim();
    const key = f.toLowerCase().replace(/\s+/g, ' ');
    if (seen.has(key)) continue;
    seen.add(key);
    out.push(f);
    if (out.length === MAX_FACTS) break;
  }
  return out;
}

const squash = (s: string): string => s.replace(/\s+/g, ' ').trim().toLowerCase();

export function ratingsToQuestions(ratings: readonly Rating[]): ExportResult {
  // Latest rating per question wins: staff may rate the same answer again after a fix.
  const latest = new Map<string, Rating>();
  for (const r of ratings) {
    const key = JSON.stringify([r.collection, squash(r.question), r.history.map((h) => [h.role, squash(h.content)])]);
    const prev = latest.get(key);
    if (!prev || prev.id < r.id) latest.set(key, r);
  }
  const result: ExportResult = { questions: [], skipped: [] };
  for (const r of [...latest.values()].sort((a, b) => a.id - b.id)) {
    const id = `fb-${r.id}`;
    const comment = r.comment ? ` Comment: ${r.comment}` : '';
    const base = {
      id,
      question: r.question,
      page: null,
      section: null,
      must_contain_any: [],
      follow_up_of: null,
      collection: r.collection,
      ...(r.history.length > 0 ? { history: r.history } : {}),
    };
    if (r.abstained && !r.helpful) {
      result.skipped.push({ id, question: r.question, reason: `no answer was given and staff expected one; label it by hand.${comment}` });
      continue;
    }
    if (r.abstained || !r.helpful) {
      const why = r.abstained
        ? 'Staff agreed the documents do not cover this.'
        : `Staff rated this answer not helpful: "${r.answer.slice(0, 300)}". Expect no answer until the right one is labelled.`;
      result.questions.push({
        ...base,
        answerable: false,
        doc: null,
        must_contain: [],
        must_not_contain: [],
        kind: 'unanswerable',
        note: `From desk rating ${r.id} (${r.createdAt}). ${why}${comment}`,
      });
      continue;
    }
    const first = [...r.sources].sort((a, b) => a.n - b.n)[0];
    result.questions.push({
      ...base,
      answerable: true,
      doc: first?.source ?? null,
      page: first?.page ?? null,
      section: first?.section || null,
      must_contain: keyFigures(r.answer),
      must_not_contain: [],
      kind: r.history.length > 0 ? 'follow-up' : 'answerable',
      note: `From desk rating ${r.id} (${r.createdAt}): staff found this answer helpful.${comment}`,
    });
  }
  return result;
}

/** One JSON object per line, as `readQuestions` expects. */
export function toJsonl(questions: readonly ExportedQuestion[]): string {
  return questions.map((q) => JSON.stringify(q)).join('\n') + (questions.length > 0 ? '\n' : '');
}
