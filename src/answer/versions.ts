// Two versions of one policy in the context would let an answer quote rules that no longer
// apply. When sources are versions of the same document and both carry an effective date,
// only the newer one is kept, unless the question asks about the older one on purpose.

/** What version choice needs to know of a hit or source. */
export interface Versioned {
  documentId: string;
  title: string;
  effectiveDate: string | null;
}

export interface VersionChoice<T extends Versioned> {
  kept: T[];
  /** How many items were dropped as other versions. */
  dropped: number;
  /** Effective date of each kept document that had another version dropped, by documentId. */
  chosen: Map<string, string>;
}

// "(2025)", "2026", "v2", "version 3", "issue 4", "rev. B": marks of a version, not of the topic.
const VERSION_MARK = /\((?:[^()]*\b(?:19|20)\d{2}\b[^()]*)\)|\b(?:19|20)\d{2}\b|\b(?:v|version|issue|rev(?:ision)?\.?)\s*[\w.]+\b/gi;

// Wording that asks about the earlier rules rather than the current ones.
const ASKS_OLD = /\b(?:old|older|previous|earlier|former|superseded|outdated|prior|used to|before the change|last year'?s?)\b/i;

/** The title with version marks removed, lower-cased, for comparing versions of one policy. */
export function policyKey(title: string): string {
  return title
    .replace(VERSION_MARK, ' ')
    .toLowerCase()
    .replace(/[^\p{L}\p{N}]+/gu, ' ')
    .trim();
}

/**
 * Keeps one version per policy: the newest by effective date, or the oldest when the question
 * asks about earlier rules (or names a year only the older title carries). Items without an
 * effective date, or without another version present, are kept as they are, in order.
 */
export function chooseVersions<T extends Versioned>(question: string, sources: T[]): VersionChoice<T> {
  const groups = new Map<string, { documentId: string; date: string; title: string }[]>();
  for (const s of sources) {
    if (!s.effectiveDate) continue;
    const key = policyKey(s.title);
    if (!key) continue;
    const list = groups.get(key) ?? [];
    if (!list.some((d) => d.documentId === s.documentId)) list.push({ documentId: s.documentId, date: s.effectiveDate, title: s.title });
    groups.set(key, list);
  }
  const drop = new Set<string>();
  const chosen = new Map<string, string>();
  for (const list of groups.values()) {
    // Identical titles are more likely two unrelated pages than two versions.
    if (list.length < 2 || new Set(list.map((d) => d.title)).size < 2) continue;
    list.sort((a, b) => a.date.localeCompare(b.date));
    const oldest = list[0];
    const newest = list[list.length - 1];
    if (!oldest || !newest) continue;
    const namesOldYear = [...question.matchAll(/\b(?:19|20)\d{2}\b/g)].some((m) => oldest.title.includes(m[0]) && !newest.title.includes(m[0]));
    const keep = ASKS_OLD.test(question) || namesOldYear ? oldest : newest;
    for (const d of list) if (d.documentId !== keep.documentId) drop.add(d.documentId);
    chosen.set(keep.documentId, keep.date);
  }
  const kept = drop.size === 0 ? sources : sources.filter((s) => !drop.has(s.documentId));
  return { kept, dropped: sources.length - kept.length, chosen };
}

/** The short note telling the reader which version an answer came from. */
export function versionNote(date: string): string {
  return `(from the version effective ${date})`;
}
