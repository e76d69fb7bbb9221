import { describe, expect, it } from 'vitest';
import { answerCue, holdsKind, missesKind } from '../../src/answer/cues.js';

// Answer types after the coarse question classes of Li and Roth (COLING 2002); the sentences are invented.
describe('answerCue', () => {
  it('reads the type of fact from the question form', () => {
    expect(answerCue('How long are CCTV recordings kept?')).toBe('duration');
    expect(answerCue('How far in advance should assistance be booked?')).toBe('duration');
    expect(answerCue('How much is the penalty fare?')).toBe('money');
    expect(answerCue('What percentage is added as an administration fee?')).toBe('percentage');
    expect(answerCue('How often is the register reviewed?')).toBe('frequency');
    expect(answerCue('How old do you need to be for a Senior Pass?')).toBe('age');
    expect(answerCue('How many dogs may each customer bring?')).toBe('count');
    expect(answerCue('What is the speed limit in the shed?')).toBe('measure');
    expect(answerCue('When are T2 trams not running?')).toBe('time');
    expect(answerCue('What phone number do I ring to report a fault?')).toBe('phone');
    expect(answerCue('What email address do complaints go to?')).toBe('contact');
    expect(answerCue('Where do I hand in a found wallet?')).toBe('place');
    expect(answerCue('Which team reviews complaints?')).toBe('agent');
    expect(answerCue('Are folding bikes allowed?')).toBe('rule');
    expect(answerCue('Tell me about the lost property process')).toBeNull();
  });

  it('finds the asked-for type in a sentence and flags one that lacks a precise type', () => {
    expect(holdsKind('duration', 'Found items are kept for 30 days.')).toBe(true);
    expect(holdsKind('duration', 'Found items are kept at the depot.')).toBe(false);
    expect(holdsKind('money', 'The charge is 25p per day.')).toBe(true);
    expect(holdsKind('phone', 'Call us on 0100 555 0123 at any time.')).toBe(true);
    expect(holdsKind('contact', 'Write to records@valley.example for a copy.')).toBe(true);
    expect(holdsKind('frequency', 'Band A is reviewed every 3 months.')).toBe(true);
    // A count stated at the end of a clause ("up to a total of four;").
    expect(holdsKind('count', '- small pets, such as mice or rats, up to a total of four;')).toBe(true);
    expect(holdsKind('count', '- small pets, such as mice or rats;')).toBe(false);
    expect(missesKind('count', '1.1 These conditions apply to every journey on a tram.')).toBe(true);
    expect(missesKind('count', 'Each customer may bring one dog.')).toBe(false);
    expect(missesKind('rule', 'Anything at all.')).toBe(false);
  });
});
