// When to say "the documents don't answer this": the reply's wording and reasons. The decision
// itself is made from evidence features by a fitted model (evidence.ts).

import type { ContextSource } from './types.js';

export const ABSTAIN_TEXT = 'The available documents do not answer this question.';

export type AbstainReason = 'no_hits' | 'weak_evidence' | 'model_abstained' | 'unsupported_answer';

/** True when a model reply is (essentially) the abstention sentence and cites nothing. */
export function isAbstentionReply(reply: string): boolean {
  if (/\[\d+\]/.test(reply)) return false;
  const r = normalise(reply);
  const a = normalise(ABSTAIN_TEXT);
  return r.length > 0 && r.includes(a) && r.length <= a.length * 2;
}

/** Lower-cased heading names of a source's parts, used to skip heading-only lines. */
export function headingSet(s: ContextSource): Set<string> {
  const out = new Set<string>();
  for (const p of s.parts) for (const h of p.section.split(' > ')) if (h.trim()) out.add(h.trim().toLowerCase());
  for (const h of s.section.split(' > ')) if (h.trim()) out.add(h.trim().toLowerCase());
  return out;
}

function normalise(s: string): string {
  return s
    .toLowerCase()
    .replace(/[’']/g, '')
    .replace(/[^\p{L}\p{N}]+/gu, ' ')
    .trim();
}

