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
    "bias": -5.2388,
    "weights": [
      0.6401,
      1.6525,
      0.9501,
      -0.2087,
      0.0071,
      0.4359,
      0.6333,
      0.7184,
      -0.7184,
      0.0754,
      0.2121,
      0.481,
      1.5644,
      0.1571,
      -0.38,
      0.1022
    ]
  },
  "decision": {
    "names": [
      "bestContextCoverage",
      "maxContextCoverage",
      "unknownShare"
    ],
    "bias": -0.59,
    "weights": [
      1.1789,
      0.829,
      0
    ],
    "threshold": 0.47
  },
  "calibration": {
    "knots": [
      [
        0.3206593195157181,
        0.001
      ],
      [
        0.32160611926596344,
        0.209
      ],
      [
        0.33399619813483294,
        0.25
      ],
      [
        0.3493312980871651,
        0.277
      ],
      [
        0.5846214382931924,
        0.316
      ],
      [
        0.5909974908792859,
        0.415
      ],
      [
        0.63259165735763,
        0.527
      ],
      [
        0.6609477732121876,
        0.6
      ],
      [
        0.6634130158981788,
        0.636
      ],
      [
        0.7433987731457494,
        0.745
      ],
      [
        0.7503469790566932,
        0.796
      ],
      [
        0.7554420656017944,
        0.912
      ],
      [
        0.8186167628817985,
        0.967
      ]
    ],
    "heldOutError": 0.35
  }
};
