import { describe, expect, it } from 'vitest';
import { expansionWords, isLightTerm, questionTerms, termIn } from '../../src/answer/synonyms.js';
import { contentStems } from '../../src/answer/words.js';

describe('questionTerms', () => {
  it('turns an everyday phrase into one term that the policy wording satisfies', () => {
    const terms = questionTerms('How long do I have to ask for my money back after a late tram?');
    const money = terms.find((t) => t.label === 'money back');
    expect(money).toBeDefined();
    expect(termIn(money!, contentStems('Claims for delay refunds must be made within 28 days.'))).toBe(true);
    expect(termIn(money!, contentStems('Tickets are valid for one day.'))).toBe(false);
    expect(terms.map((t) => t.label)).toContain('tram');
  });

  it('needs every word of a multi-word alternative', () => {
    const [wires] = questionTerms('live wires');
    expect(termIn(wires!, contentStems('Keep away from the overhead line.'))).toBe(true);
    expect(termIn(wires!, contentStems('The line guide shows journey times.'))).toBe(false);
  });

  it('marks framing verbs as light and topic words as not', () => {
    const terms = questionTerms('Is my electric scooter OK to bring on the tram?');
    expect(isLightTerm(terms.find((t) => t.label === 'bring')!)).toBe(true);
    expect(isLightTerm(terms.find((t) => t.label === 'tram')!)).toBe(false);
  });
});

describe('expansionWords', () => {
  it('adds the policy wording for a paraphrased term and nothing for a plain question', () => {
    expect(expansionWords('Can I put my bicycle on the bus?')).toContain('bike');
    expect(expansionWords('What voltage does the tramway carry?')).toEqual([]);
  });
});
