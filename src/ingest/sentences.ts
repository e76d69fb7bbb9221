export interface Span {
  start: number;
  end: number;
}

const segmenters = new Map<string, Intl.Segmenter>();

function segmenterFor(locale: string): Intl.Segmenter {
  let s = segmenters.get(locale);
  if (!s) {
    s = new Intl.Segmenter(locale, { granularity: 'sentence' });
    segmenters.set(locale, s);
  }
  return s;
}

/**
 * Sentence spans by the Unicode sentence-break rules (UAX #29, via ICU in Intl.Segmenter),
 * trimmed of surrounding whitespace, as exact offsets into `text`. Line breaks are hard
 * boundaries under those rules, so table and list lines come out one per span.
 */
export function splitSentences(text: string, locale = 'en'): Span[] {
  const spans: Span[] = [];
  for (const { segment, index } of segmenterFor(locale).segment(text)) {
    const lead = segment.length - segment.trimStart().length;
    const trimmed = segment.trim();
    if (trimmed === '') continue;
    const start = index + lead;
    spans.push({ start, end: start + trimmed.length });
  }
  return spans;
}
