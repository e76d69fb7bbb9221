// The answer models' numbers. Written by `sourcebound eval fit --features demo.jsonl,kestrel-housing.jsonl,fenwold-libraries.jsonl,policyqa.jsonl --module fitted-model.ts`
// (docs/eval-answers.md); do not edit by hand.
import type { AnswerModel } from './evidence.js';

export const FITTED_MODEL: AnswerModel = {
  "provenance": "fitted leave-one-corpus-out on demo, fenwold-libraries, kestrel-housing, policyqa; this model on all of them, calibrated on held-out predictions",
  "composition": {
    "maxSentences": 3,
    "closeRatio": 0.2
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
      "tableRow",
      "softCoverage"
    ],
    "bias": -6.0208,
    "weights": [
      0.2894,
      1.5952,
      0.9432,
      -0.1869,
      0.0203,
      0.3714,
      0.7015,
      0.6993,
      -0.6993,
      0.057,
      0.1593,
      0.8906,
      1.4158,
      0.1714,
      -0.3566,
      0.1197,
      0.91
    ]
  },
  "decision": {
    "names": [
      "bestContextCoverage",
      "maxContextCoverage",
      "unknownShare"
    ],
    "bias": -0.5593,
    "weights": [
      1.0886,
      0.8622,
      0
    ],
    "threshold": 0.47
  },
  "calibration": {
    "knots": [
      [
        0.3102287532464893,
        0.001
      ],
      [
        0.3118942923017936,
        0.231
      ],
      [
        0.31393683129219463,
        0.289
      ],
      [
        0.3548722682125578,
        0.3
      ],
      [
        0.5852922204471547,
        0.33
      ],
      [
        0.5896570594803621,
        0.343
      ],
      [
        0.6029346944259879,
        0.491
      ],
      [
        0.6232781201434208,
        0.491
      ],
      [
        0.6424831168205296,
        0.541
      ],
      [
        0.6585179080922348,
        0.673
      ],
      [
        0.7447491660702132,
        0.831
      ],
      [
        0.75659303131143,
        0.857
      ],
      [
        0.7666729673769278,
        0.928
      ],
      [
        0.8207948215632153,
        0.935
      ]
    ],
    "heldOutError": 0.45
  }
};
