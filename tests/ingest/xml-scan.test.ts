// The XML part counter reads a part a piece at a time as it is inflated. It replaced a pass over the whole
// inflated part; that pass is kept below, as it was, to check that both give the same count and the same
// refusal for every input and every way of cutting it into pieces.
import { describe, expect, it } from 'vitest';
import { LimitExceeded } from '../../src/ingest/budget.js';
import { XmlTextCounter } from '../../src/ingest/xml-scan.js';

/** The previous whole-part pass (src/ingest/load-docx.ts before the counter), unchanged. */
function wholePartCount(xml: Uint8Array, maxDepth: number): number {
  const LT = 0x3c;
  const GT = 0x3e;
  const SLASH = 0x2f;
  const AMP = 0x26;
  const SEMI = 0x3b;
  const textChars = (from: number, to: number): number => {
    let n = 0;
    let blank = true;
    for (let k = from; k < to; k++) {
      const c = xml[k]!;
      if (c === AMP) {
        const semi = xml.indexOf(SEMI, k);
        if (semi !== -1 && semi < to && semi - k <= 12) k = semi;
      } else if ((c & 0xc0) === 0x80) continue;
      if (c !== 0x20 && c !== 0x09 && c !== 0x0a && c !== 0x0d) blank = false;
      n++;
    }
    return blank ? 0 : n;
  };
  let depth = 0;
  let chars = 0;
  let textFrom = 0;
  for (let i = xml.indexOf(LT); i !== -1 && i < xml.length; i = xml.indexOf(LT, i)) {
    chars += textChars(textFrom, i);
    const next = xml[i + 1];
    if (next === SLASH) {
      depth = Math.max(0, depth - 1);
      const close = xml.indexOf(GT, i);
      i = close === -1 ? xml.length : close + 1;
      textFrom = i;
      continue;
    }
    let j = i + 1;
    let quote = 0;
    for (; j < xml.length; j++) {
      const c = xml[j]!;
      if (quote) {
        if (c === quote) quote = 0;
      } else if (c === 0x22 || c === 0x27) quote = c;
      else if (c === GT) break;
    }
    if (next !== 0x21 && next !== 0x3f && xml[j - 1] !== SLASH && ++depth > maxDepth) {
      throw new LimitExceeded('htmlMaxDepth', `the Word file nests elements more than ${maxDepth} deep (limits.htmlMaxDepth)`);
    }
    i = j + 1;
    textFrom = i;
  }
  return chars;
}

type Outcome = { chars: number } | { error: string };

const whole = (xml: Uint8Array, maxDepth: number): Outcome => {
  try {
    return { chars: wholePartCount(xml, maxDepth) };
  } catch (err) {
    return { error: (err as Error).message };
  }
};

const inPieces = (xml: Uint8Array, maxDepth: number, cuts: number[]): Outcome => {
  const counter = new XmlTextCounter(maxDepth);
  try {
    let from = 0;
    for (const cut of [...cuts, xml.length]) {
      counter.feed(xml.subarray(from, cut));
      from = cut;
    }
    return { chars: counter.finish() };
  } catch (err) {
    return { error: (err as Error).message };
  }
};

/** A seeded generator (a linear congruential generator, constants of Numerical Recipes), so a failure repeats. */
function random(seed: number): () => number {
  let s = seed >>> 0;
  return () => ((s = (Math.imul(s, 1664525) + 1013904223) >>> 0) / 2 ** 32);
}

// Fragments chosen for the cases the count must agree on: references near and over the 12-byte span, '<' before
// a ';', quotes holding '>', comments and declarations, empty-element tags, unclosed tags, whitespace-only runs,
// and multi-byte characters (UTF-8 continuation bytes).
const FRAGMENTS = [
  '<w:p>', '</w:p>', '<w:t xml:space="preserve">', '</w:t>', '<w:br/>', '<a b=">">', "<a b='x>y'/>", '<!-- a > b -->',
  '<?xml version="1.0"?>', '<!DOCTYPE x>', 'Tram stop', ' ', '\n', '\t', '&amp;', '&#233;', '&verylongnamehere;', '& ',
  '&ab', ';', '<', '>', '/', 'é', '運', '"', "'", '</', '<>', 'x', '&lt;', '&#x1F68B;',
];

describe('XmlTextCounter', () => {
  it('counts what the whole-part pass counted, however the part is cut into pieces (2,000 generated parts)', () => {
    const next = random(20261204);
    const encoder = new TextEncoder();
    for (let t = 0; t < 2000; t++) {
      const parts = Array.from({ length: 1 + Math.floor(next() * 60) }, () => FRAGMENTS[Math.floor(next() * FRAGMENTS.length)]);
      const xml = encoder.encode(parts.join(''));
      const maxDepth = 1 + Math.floor(next() * 8);
      const cuts = Array.from({ length: Math.floor(next() * 6) }, () => Math.floor(next() * (xml.length + 1))).sort((a, b) => a - b);
      const expected = whole(xml, maxDepth);
      expect(inPieces(xml, maxDepth, cuts), `part ${JSON.stringify(parts.join(''))}, cuts ${cuts}, depth ${maxDepth}`).toEqual(expected);
      // One byte at a time: every reference and tag is cut.
      const everyByte = Array.from({ length: Math.max(0, xml.length - 1) }, (_, i) => i + 1);
      expect(inPieces(xml, maxDepth, everyByte)).toEqual(expected);
    }
  });

  it('counts a reference cut between pieces as one character, and a stray "&" as one of several', () => {
    const xml = new TextEncoder().encode('<w:t>Fares &amp; passes</w:t><w:t>A & B</w:t><w:t>&ab</w:t>');
    // "Fares & passes" (14) + "A & B" (5) + "&ab" (3).
    expect(wholePartCount(xml, 8)).toBe(22);
    for (let cut = 0; cut <= xml.length; cut++) expect(inPieces(xml, 8, [cut])).toEqual({ chars: 22 });
  });

  it('refuses nesting past the limit with the reason naming it, and counts nothing of text left after the last tag', () => {
    const deep = new TextEncoder().encode('<a><b><c><d>x</d></c></b></a>');
    expect(inPieces(deep, 3, [5, 9])).toEqual({ error: 'the Word file nests elements more than 3 deep (limits.htmlMaxDepth)' });
    expect(inPieces(deep, 4, [5, 9])).toEqual({ chars: 1 });
    expect(inPieces(new TextEncoder().encode('<a>kept</a> dropped'), 4, [])).toEqual({ chars: 4 });
  });

  it('reports an open stretch of text in charsSoFar, so an endless one is stopped, but not one of only whitespace', () => {
    const counter = new XmlTextCounter(8);
    counter.feed(new TextEncoder().encode('<w:t>Tram'));
    expect(counter.charsSoFar).toBe(4);
    counter.feed(new TextEncoder().encode(' stop</w:t><w:t>   '));
    expect(counter.charsSoFar).toBe(9);
    expect(counter.finish()).toBe(9);
  });
});
