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
    "bias": -5.019,
    "weights": [
      1.3578,
      1.087,
      -0.3621,
      0.0197,
      -0.1872,
      0.2564,
      0.0135,
      0.3662,
      -0.9773,
      0.7944,
      0.9254,
      0.4601,
      1.2459,
      0.6852,
      -0.472,
      -0.0407
    ]
  },
  "decision": {
    "names": [
      "bestContextCoverage",
      "maxContextCoverage",
      "unknownShare"
    ],
    "bias": -0.5791,
    "weights": [
      1.3651,
      0.7292,
      0
    ],
    "threshold": 0.48
  },
  "calibration": {
    "knots": [
      [
        0.31006731479927574,
        0.001
      ],
      [
        0.31078948817432855,
        0.001
      ],
      [
        0.3110980383238001,
        0.232
      ],
      [
        0.5965176726831716,
        0.337
      ],
      [
        0.5989224785072111,
        0.354
      ],
      [
        0.6116526308599504,
        0.483
      ],
      [
        0.620509547983452,
        0.566
      ],
      [
        0.6757337638952264,
        0.641
      ],
      [
        0.7603329766476611,
        0.649
      ],
      [
        0.772468045111812,
        0.753
      ],
      [
        0.7773420269011969,
        0.777
      ],
      [
        0.7890132783814087,
        0.908
      ],
      [
        0.8625223851969993,
        0.999
      ]
    ]
  }
};
