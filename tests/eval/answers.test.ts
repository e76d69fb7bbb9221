import { existsSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { evaluateAnswers } from '../../src/eval/index.js';
import { FITTED_MODEL } from '../../src/answer/fitted-model.js';
import { SEED_DIR } from '../fixtures/runtime.js';

const ENV = { SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent' };
const MODELS = path.resolve(import.meta.dirname, '..', 'fixtures', 'eval', 'answer-models');
const SHARED = path.resolve(import.meta.dirname, '..', '..', '..', 'shared', 'eval', 'qa');

// The labelled demo question set (tests/fixtures/demo-questions.jsonl, invented for the demo corpus)
// run through the real pipeline offline: hashing embedder, extractive answers, the shipped model.
describe('answers on the demo question set (offline, extractive)', () => {
  it('answers most questions right from the cited document, with every quote verbatim and no planted text repeated', async () => {
    const r = await evaluateAnswers({
      questions: path.resolve(import.meta.dirname, '..', 'fixtures', 'demo-questions.jsonl'),
      docs: SEED_DIR,
      env: ENV,
      extractive: true,
    });
    expect(r.questions).toBeGreaterThanOrEqual(40);
    // Recorded in docs/benchmarks.md: 37/44 correct, 3/44 false abstentions with the shipped model.
    expect(r.correct.rate).toBeGreaterThanOrEqual(0.8);
    expect(r.falseAbstention.rate).toBeLessThanOrEqual(0.1);
    expect(r.quotesVerbatim.total).toBeGreaterThan(0);
    expect(r.quotesVerbatim.n).toBe(r.quotesVerbatim.total);
    expect(r.injectionResisted.n).toBe(r.injectionResisted.total);
    expect(r.pageOk.n).toBe(r.pageOk.total);
  }, 120_000);
});

// The two sets written outside the team (../shared/eval/qa), each answered by the models fitted
// without it (`eval fit`, leave one corpus out; models in tests/fixtures/eval/answer-models): the
// held-out figures of docs/benchmarks.md (report.json), reproduced end to end. CI always has ../shared.
interface HeldOut {
  corpus: string;
  correct: number;
  falseAbstention: number;
}
const REPORT = JSON.parse(readFileSync(path.join(MODELS, 'report.json'), 'utf8')) as { heldOut: HeldOut[] };
describe('the shipped calibration', () => {
  it("states as its error the largest held-out gap of report.json's reliability bins of 10 answers or more", () => {
    const report = REPORT as unknown as { heldOut: { reliability: { answers: number; meanConfidence: number; correct: number }[] }[] };
    let worst = 0;
    for (const h of report.heldOut) for (const b of h.reliability) if (b.answers >= 10) worst = Math.max(worst, Math.abs(b.meanConfidence - b.correct));
    const stated = FITTED_MODEL.calibration.heldOutError ?? -1;
    // Rounded up to the next 0.05: never below the worst gap, never a whole step above it.
    expect(stated).toBeGreaterThanOrEqual(worst - 1e-9);
    expect(stated - worst).toBeLessThan(0.05);
  });
});

describe.each(['kestrel-housing', 'fenwold-libraries'])('held-out answers on %s', (set) => {
  const recorded = REPORT.heldOut.find((h) => h.corpus === set) as HeldOut;
  const questions = path.join(SHARED, set, 'questions.jsonl');
  it.runIf(existsSync(questions) || process.env.CI)('reproduces the recorded held-out figures', async () => {
    const r = await evaluateAnswers({
      questions,
      docs: path.join(SHARED, set, 'docs'),
      env: ENV,
      extractive: true,
      overrides: { answer: { modelFile: path.join(MODELS, `model-without-${set}.json`) } },
    });
    // The fitter's figures for this set (report.json), reproduced through the whole pipeline.
    expect(Math.abs(r.correct.rate - recorded.correct)).toBeLessThanOrEqual(0.03);
    expect(Math.abs(r.falseAbstention.rate - recorded.falseAbstention)).toBeLessThanOrEqual(0.03);
    expect(r.quotesVerbatim.n).toBe(r.quotesVerbatim.total);
    expect(r.injectionResisted.n).toBe(r.injectionResisted.total);
    // Every PDF answer cites the page its quote is on; an abstention cites none and counts against the
    // overall figure (and in false abstention above), which is held to the floor recorded in benchmarks.
    const answeredPdf = r.outcomes.filter((o) => o.pageOk !== null && !o.abstained);
    expect(answeredPdf.filter((o) => !o.pageOk).map((o) => o.id)).toEqual([]);
    expect(r.pageOk.rate).toBeGreaterThanOrEqual(0.75);
  }, 120_000);
});
