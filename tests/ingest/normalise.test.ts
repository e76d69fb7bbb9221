import { describe, expect, it } from 'vitest';
import { buildNormalisedDocument, normaliseText } from '../../src/ingest/normalise.js';

describe('normaliseText', () => {
  it('composes to NFC (Unicode UAX #15): e + combining acute becomes é', () => {
    expect(normaliseText('cafe\u0301')).toBe('caf\u00e9');
  });

  it('removes control characters but keeps line breaks, and turns tabs into spaces', () => {
    expect(normaliseText('Fare\u0007 zone\u0085 A\tB\r\nnext\u0000 line')).toBe('Fare zone A B\nnext line');
  });

  it('collapses runs of spaces, including no-break spaces, and trims line ends', () => {
    expect(normaliseText('  Route\u00a0\u00a0 7   runs   \n  hourly  ')).toBe('Route 7 runs\n hourly');
  });

  it('drops soft hyphens so a quoted word matches its plain spelling', () => {
    expect(normaliseText('super\u00advisor')).toBe('supervisor');
  });
});

describe('buildNormalisedDocument', () => {
  const doc = buildNormalisedDocument([
    { kind: 'heading', level: 1, text: 'Lost Property' },
    { kind: 'paragraph', text: 'Items are kept for   28 days.' },
    { kind: 'paragraph', text: '   ' },
    { kind: 'heading', level: 2, text: 'Claiming\nan item' },
    { kind: 'list', text: '- Bring ID\n\n\n- Describe the item' },
    { kind: 'heading', level: 3, text: 'By post' },
    { kind: 'paragraph', text: 'Postage is charged.', page: 2 },
    { kind: 'heading', level: 2, text: 'Unclaimed items' },
    { kind: 'paragraph', text: 'They go to charity.' },
  ]);

  it('joins normalised blocks with a blank line and drops empty ones', () => {
    expect(doc.text).toBe(
      'Lost Property\n\nItems are kept for 28 days.\n\nClaiming an item\n\n- Bring ID\n- Describe the item\n\nBy post\n\nPostage is charged.\n\nUnclaimed items\n\nThey go to charity.',
    );
    expect(doc.blocks).toHaveLength(8);
  });

  it('records offsets that slice back to each block text', () => {
    for (const b of doc.blocks) expect(doc.text.slice(b.start, b.end)).toBe(b.text);
  });

  it('tracks heading paths, resetting deeper levels at each heading', () => {
    expect(doc.blocks.map((b) => b.headingPath.join(' > '))).toEqual([
      'Lost Property',
      'Lost Property',
      'Lost Property > Claiming an item',
      'Lost Property > Claiming an item',
      'Lost Property > Claiming an item > By post',
      'Lost Property > Claiming an item > By post',
      'Lost Property > Unclaimed items',
      'Lost Property > Unclaimed items',
    ]);
    expect(doc.blocks[5]!.page).toBe(2);
  });
});
