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
    "bias": -0.7042,
    "weights": [
      1.4099,
      0.82,
      0.3801
    ],
    "threshold": 0.46
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
        0.237
      ],
      [
        0.33775485333966315,
        0.245
      ],
      [
        0.5924024887888681,
        0.291
      ],
      [
        0.6113329354534229,
        0.5
      ],
      [
        0.611421700822306,
        0.515
      ],
      [
        0.614813594726353,
        0.564
      ],
      [
        0.676519665346884,
        0.58
      ],
      [
        0.7165077261808974,
        0.649
      ],
      [
        0.7551324635094852,
        0.68
      ],
      [
        0.7701995401978008,
        0.75
      ],
      [
        0.7729012894771269,
        0.799
      ],
      [
        0.7928954709855955,
        0.905
      ],
      [
        0.8635743241557496,
        0.999
      ]
    ]
  }
};
