import { describe, expect, it } from 'vitest';
import { bestLongForm, findAbbreviations } from '../../src/answer/abbreviations.js';
import { createLexiconSource } from '../../src/answer/lexicon-source.js';
import { questionTerms, termMatch } from '../../src/answer/terms.js';
import { buildVocabulary } from '../../src/answer/vocabulary.js';
import { stem } from '../../src/answer/words.js';

// Schwartz and Hearst, "A simple algorithm for identifying abbreviation definitions in biomedical
// text", PSB 2003. The worked example "heat shock transcription factor (HSTF)" is the paper's (from
// memory); the rest are invented for the project.
describe('bestLongForm (Schwartz and Hearst 2003)', () => {
  it("matches the short form's characters right to left, the first at a word start", () => {
    expect(bestLongForm('HSTF', 'the expression of heat shock transcription factor')).toBe('heat shock transcription factor');
    expect(bestLongForm('TOIL', 'you can take time off in lieu')).toBe('time off in lieu');
    // The first letter must begin a word: "TC" is not "ouTCome".
    expect(bestLongForm('TC', 'a good outcome')).toBeNull();
    expect(bestLongForm('XYZ', 'nothing to see here')).toBeNull();
  });
});

describe('findAbbreviations', () => {
  it('finds definitions in both orders, with or without quotes', () => {
    expect(findAbbreviations('Staff earn time off in lieu (TOIL) for extra hours.')).toEqual([{ short: 'TOIL', long: 'time off in lieu' }]);
    expect(findAbbreviations('We collect Personally Identifiable Information ("PII") about you.')).toEqual([{ short: 'PII', long: 'personally identifiable information' }]);
    expect(findAbbreviations('Ask the DSO (designated safeguarding officer) first.')).toEqual([{ short: 'DSO', long: 'designated safeguarding officer' }]);
  });

  it('leaves ordinary parentheses alone', () => {
    expect(findAbbreviations('Use the form (see below) or phone us (0100 555 0100). Fees (if any) are shown (in pounds).')).toEqual([]);
    // A capitalised word that is not an abbreviation of the words before it.
    expect(findAbbreviations('Call the front desk (MARROWBY) today.')).toEqual([]);
  });

  it('stays within the clause before the parenthesis', () => {
    expect(findAbbreviations('Time is short. Off-site loans (OSL) need a form.')).toEqual([{ short: 'OSL', long: 'off-site loans' }]);
  });
});

describe('abbreviations in the lexicon', () => {
  const texts = ['Staff earn time off in lieu (TOIL) for agreed extra hours.', 'TOIL is earned hour for hour.'];

  it('are collected by the vocabulary once each', () => {
    expect(buildVocabulary([...texts, texts[0] as string]).abbreviations).toEqual([{ short: 'TOIL', long: 'time off in lieu' }]);
  });

  it('let a question in one form find a sentence in the other', () => {
    const lexiconFor = createLexiconSource({ generation: () => 1, texts: () => texts, termsDir: null });
    const lexicon = lexiconFor('staff');
    const terms = questionTerms('How much time off in lieu do I get for a Saturday?', lexicon);
    const toil = terms.find((t) => t.label === 'time off in lieu');
    expect(toil, JSON.stringify(terms.map((t) => t.label))).toBeDefined();
    expect(termMatch(toil!, new Set(['toil', stem('earned')]))).toBe(1);
    // The same array while nothing changes (the term matcher caches by it).
    expect(lexiconFor('staff').groups).toBe(lexicon.groups);
  });
});
