// The answer models' numbers. Written by `sourcebound eval fit --features demo.jsonl,kestrel-housing.jsonl,fenwold-libraries.jsonl,policyqa.jsonl --module fitted-model.ts`
// (docs/eval-answers.md); do not edit by hand.
import type { AnswerModel } from './evidence.js';

export const FITTED_MODEL: AnswerModel = {
  "provenance": "fitted leave-one-corpus-out on demo, fenwold-libraries, kestrel-housing, policyqa; this model on all of them, calibrated on held-out predictions",
  "composition": {
    "maxSentences": 3,
    "closeRatio": 0
  },
  "sentence": {
    "names": [
      "coverage",
      "contextCoverage",
      "headingCoverage",
      "previousCoverage",
      "firstUnderHeading",
      "relatedCoverage",
      "passageCoverage",
      "kindHeld",
      "kindMissed",
      "ruleHeld",
      "sourceRank",
      "sourceScore",
      "cosine",
      "focus",
      "short",
      "tableRow"
    ],
    "bias": -5.0258,
    "weights": [
      1.3553,
      1.0839,
      -0.3593,
      0.0211,
      -0.1885,
      0.2636,
      0.0185,
      0.3791,
      -0.9612,
      0.7991,
      0.9271,
      0.4568,
      1.2441,
      0.6851,
      -0.4659,
      -0.0341
    ]
  },
  "decision": {
    "names": [
      "bestContextCoverage",
      "maxContextCoverage",
      "unknownShare"
    ],
    "bias": -0.5816,
    "weights": [
      1.3614,
      0.7369,
      0
    ],
    "threshold": 0.48
  },
  "calibration": {
    "knots": [
      [
        0.3100742344525193,
        0.001
      ],
      [
        0.3103793852827523,
        0.001
      ],
      [
        0.31068417452252034,
        0.232
      ],
      [
        0.596313989519748,
        0.353
      ],
      [
        0.6126905132092328,
        0.495
      ],
      [
        0.6202631641902326,
        0.496
      ],
      [
        0.628162999250722,
        0.572
      ],
      [
        0.676519665346884,
        0.642
      ],
      [
        0.7624743679444942,
        0.646
      ],
      [
        0.77191349860589,
        0.753
      ],
      [
        0.777480973054075,
        0.777
      ],
      [
        0.7891748005333484,
        0.908
      ],
      [
        0.8628658986241335,
        0.999
      ]
    ]
  }
};
