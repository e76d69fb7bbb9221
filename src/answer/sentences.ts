// Sentence splitting with exact offsets. Intl.Segmenter follows the Unicode sentence
// boundary rules (UAX #29), which also break at every line break: headings, list items and
// table rows therefore come out as their own segments, which we then filter.

export interface SentenceSpan {
  /** Exactly text.slice(start, end), trimmed of surrounding whitespace. */
  text: string;
  start: number;
  end: number;
}

// UAX #29 breaks after "e.g. " or "Dr. " because it cannot tell an abbreviation from a
// full stop; these are the ones common in policy text.
const ABBREVIATIONS = /(?:^|[\s(])(?:e\.g|i\.e|etc|approx|incl|no|nos|dr|mr|mrs|ms|st|vs|cf|ref|tel|min|max|p|pp)\.$/i;

const segmenter = new Intl.Segmenter('en', { granularity: 'sentence' });

/** Raw sentence spans of `text`, trimmed, empty ones dropped, abbreviation splits re-joined. */
export function splitSentences(text: string): SentenceSpan[] {
  const raw: SentenceSpan[] = [];
  for (const seg of segmenter.segment(text)) {
    const lead = seg.segment.length - seg.segment.trimStart().length;
    const body = seg.segment.trim();
    if (body.length === 0) continue;
    const start = seg.index + lead;
    const end = start + body.length;
    const prev = raw[raw.length - 1];
    // Re-join only within a line: a break at a newline is always a real boundary.
    if (prev && ABBREVIATIONS.test(prev.text) && !text.slice(prev.end, start).includes('\n')) {
      prev.end = end;
      prev.text = text.slice(prev.start, end);
      continue;
    }
    raw.push({ text: body, start, end });
  }
  return raw;
}

/** True when only whitespace without a line break lies between two spans (same paragraph). */
export function sameLine(text: string, a: SentenceSpan, b: SentenceSpan): boolean {
  const between = text.slice(a.end, b.start);
  return /^[^\S\n]*$/.test(between);
}

/**
 * Segments that are not prose worth quoting: table separator rows, lines with almost no
 * letters, and heading-only lines (a known heading, a Markdown "#" line, or a short line in
 * title case without closing punctuation).
 */
export function isJunkSentence(sentence: string, headings: ReadonlySet<string> = new Set()): boolean {
  const s = sentence.trim();
  const letters = s.match(/[\p{L}\p{N}]/gu)?.length ?? 0;
  if (letters < 3) return true;
  if (/^[|:\-+=_*\s]+$/.test(s)) return true;
  if (/^#{1,6}\s/.test(s)) return true;
  const bare = s.replace(/^#+\s*/, '').toLowerCase();
  if (headings.has(bare)) return true;
  const words = s.split(/\s+/);
  if (words.length <= 6 && !/[.!?:;)"'”’|]$/.test(s) && !/\d/.test(s)) {
    const longWords = words.filter((w) => w.replace(/[^\p{L}]/gu, '').length >= 4);
    if (longWords.length > 0 && longWords.every((w) => /^\p{Lu}/u.test(w))) return true;
  }
  return false;
}

// Sentences opening with these lean on the sentence before them for their meaning.
const LEANS_BACK =
  /^(?:this|that|these|those|it|its|they|their|them|such|however|but|also|otherwise|therefore|thus|instead|in (?:this|that|such) case|as a result|in addition|then)\b/i;

/** True when the sentence opens with a word that points back at the sentence before ("This ...", "However, ..."). */
export function leansBack(sentence: string): boolean {
  return LEANS_BACK.test(sentence);
}

/** For a table row, the first row of its table (the header), else "". */
export function tableHeader(text: string, span: SentenceSpan): string {
  if (!span.text.includes('|')) return '';
  let lineStart = text.lastIndexOf('\n', span.start - 1) + 1;
  let header = '';
  while (lineStart > 0) {
    const prevStart = text.lastIndexOf('\n', lineStart - 2) + 1;
    const line = text.slice(prevStart, lineStart - 1);
    if (!line.includes('|')) break;
    header = line;
    lineStart = prevStart;
  }
  return header;
}
