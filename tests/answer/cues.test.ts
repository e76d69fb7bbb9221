import { describe, expect, it } from 'vitest';
import { answerCue, cueBonus, missesKind } from '../../src/answer/cues.js';

describe('answerCue', () => {
  it('reads the kind of fact from the question opener', () => {
    expect(answerCue('How long are CCTV recordings kept?')).toBe('duration');
    expect(answerCue('How far ahead should assistance be booked?')).toBe('duration');
    expect(answerCue('How much is the penalty fare?')).toBe('amount');
    expect(answerCue('How old do you need to be for a Senior Pass?')).toBe('age');
    expect(answerCue('How many dogs may each customer bring?')).toBe('count');
    expect(answerCue('What is the speed limit in the shed?')).toBe('measure');
    expect(answerCue('When are T2 trams not running?')).toBe('time');
    expect(answerCue('Are folding bikes allowed?')).toBe('rule');
    expect(answerCue('Which body reviews complaints?')).toBeNull();
  });

  it('lifts a sentence holding the asked-for kind and flags one that lacks a precise kind', () => {
    expect(cueBonus('duration', 'Found items are kept for 30 days.')).toBeGreaterThan(0);
    expect(cueBonus('duration', 'Found items are kept at the depot.')).toBe(0);
    expect(missesKind('count', '1.1 These conditions apply to every journey on a tram.')).toBe(true);
    expect(missesKind('count', 'Each customer may bring one dog.')).toBe(false);
    expect(missesKind('rule', 'Anything at all.')).toBe(false);
  });
});
