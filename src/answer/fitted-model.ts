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
      "tableRow"
    ],
    "bias": -5.2438,
    "weights": [
      0.5902,
      1.7124,
      0.9494,
      -0.244,
      -0.0019,
      0.3951,
      0.5947,
      0.7212,
      -0.7212,
      0.0765,
      0.2057,
      0.5142,
      1.577,
      0.1707,
      -0.3886,
      0.1007
    ]
  },
  "decision": {
    "names": [
      "bestContextCoverage",
      "maxContextCoverage",
      "unknownShare"
    ],
    "bias": -0.592,
    "weights": [
      1.1865,
      0.8259,
      0
    ],
    "threshold": 0.47
  },
  "calibration": {
    "knots": [
      [
        0.31011393304068247,
        0.001
      ],
      [
        0.3108259976832093,
        0.143
      ],
      [
        0.31179997437968887,
        0.244
      ],
      [
        0.33606866261006246,
        0.25
      ],
      [
        0.34264331553726435,
        0.25
      ],
      [
        0.3490749477024543,
        0.272
      ],
      [
        0.5849708073947527,
        0.31
      ],
      [
        0.5906168377970259,
        0.413
      ],
      [
        0.6292643474967191,
        0.429
      ],
      [
        0.633012631036801,
        0.492
      ],
      [
        0.6424191928616316,
        0.5
      ],
      [
        0.6440885194155845,
        0.547
      ],
      [
        0.6622050042722993,
        0.639
      ],
      [
        0.7435463023688288,
        0.662
      ],
      [
        0.7508016641333971,
        0.796
      ],
      [
        0.7555989021116765,
        0.918
      ],
      [
        0.8189535595489111,
        0.966
      ]
    ]
  }
};
