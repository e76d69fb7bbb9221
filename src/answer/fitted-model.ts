// The answer models' numbers. Written by `sourcebound eval fit` (docs/eval-answers.md); do not edit by hand.
import type { AnswerModel } from './evidence.js';

export const FITTED_MODEL: AnswerModel = {
  provenance: 'starting weights set by reasoning before any fit',
  composition: { maxSentences: 3, closeRatio: 0.6 },
  sentence: {
    names: ['coverage', 'contextCoverage', 'headingCoverage', 'previousCoverage', 'firstUnderHeading', 'relatedCoverage', 'passageCoverage', 'kindHeld', 'kindMissed', 'ruleHeld', 'sourceRank', 'sourceScore', 'cosine', 'focus', 'short', 'tableRow'],
    weights: [4, 2, 0, 0, 0, 0.5, 1, 1, -2, 0.3, 0.5, 0.5, 1, 0.5, -1, 0],
    bias: -5,
  },
  decision: {
    names: ['bestProbability', 'bestCoverage', 'bestContextCoverage', 'maxContextCoverage', 'bestKindMissed', 'unknownShare', 'unknownAny', 'strangeShare', 'bestPassageCoverage', 'margin'],
    weights: [2, 3, 1, 1, -1, -4, -1, -1, 0, 0],
    bias: -2.5,
    threshold: 0.5,
  },
  calibration: { knots: [[0.5, 0.5]] },
};
