import { describe, expect, it } from 'vitest';
import { splitSentences } from '../../src/ingest/sentences.js';

const texts = (t: string, locale?: string): string[] => splitSentences(t, locale).map((s) => t.slice(s.start, s.end));

// Expected spans follow the Unicode sentence-break rules (UAX #29): a full stop followed by a
// lower-case word is no boundary (rule SB8), a full stop between digits is none either (SB6),
// and an abbreviation followed by a capitalised word *is* one, because the default rules carry
// no abbreviation list. Each list was checked by eye against Intl.Segmenter on Node 20
// (ICU 78.2, Unicode 17).
describe('splitSentences', () => {
  it('splits English at sentence ends but not inside "e.g.", "i.e." or "3.5"', () => {
    const t = 'Dr. Pellow runs the depot, e.g. the night shift.  The tram line is 3.5 km long. Bring a valid ticket, i.e. one you bought today.';
    expect(texts(t)).toEqual([
      'Dr.',
      'Pellow runs the depot, e.g. the night shift.',
      'The tram line is 3.5 km long.',
      'Bring a valid ticket, i.e. one you bought today.',
    ]);
  });

  it('splits German with the same rules, so "z. B." before a capital breaks as UAX #29 says', () => {
    const t = 'Fahrräder sind z. B. am Wochenende frei. Die Strecke ist 3.5 km lang. Dr. Brandt leitet das Depot.';
    expect(texts(t, 'de')).toEqual([
      'Fahrräder sind z.',
      'B. am Wochenende frei.',
      'Die Strecke ist 3.5 km lang.',
      'Dr.',
      'Brandt leitet das Depot.',
    ]);
  });

  it('splits Japanese at 。！？ without spaces', () => {
    const t = '路線は3.5キロです。切符を買ってください！遅延は15分以上ですか？';
    expect(texts(t, 'ja')).toEqual(['路線は3.5キロです。', '切符を買ってください！', '遅延は15分以上ですか？']);
  });

  it('never ends a span inside a decimal number', () => {
    for (const [t, locale] of [
      ['The tram line is 3.5 km long. It has 12 stops.', 'en'],
      ['Die Strecke ist 3.5 km lang.', 'de'],
      ['路線は3.5キロです。', 'ja'],
    ] as const) {
      const at = t.indexOf('3.5');
      for (const s of splitSentences(t, locale)) expect(s.end > at && s.end < at + 3).toBe(false);
    }
  });

  it('returns exact, trimmed offsets and treats line breaks as boundaries', () => {
    const t = '  Row one | 2.40\nRow two | 3.10  \n\n Last line.  ';
    const spans = splitSentences(t);
    expect(spans).toEqual([
      { start: 2, end: 16 },
      { start: 17, end: 31 },
      { start: 36, end: 46 },
    ]);
    expect(spans.map((s) => t.slice(s.start, s.end))).toEqual(['Row one | 2.40', 'Row two | 3.10', 'Last line.']);
  });

  it('returns nothing for whitespace', () => {
    expect(splitSentences(' \n\t ')).toEqual([]);
  });
});
