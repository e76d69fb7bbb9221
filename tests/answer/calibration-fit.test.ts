// Refits the confidence calibration and re-runs the abstention threshold sweep on the labelled
// demo question set. Slow-ish and only needed when the answer stage changes, so it runs when
// asked: SOURCEBOUND_FIT=1 npx vitest run --config tests/vitest.config.ts tests/answer/calibration-fit.test.ts
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { createAnswerer, type AnswererOptions } from '../../src/answer/answerer.js';
import { DEMO_CALIBRATION, calibrate, fitIsotonic, fitPlatt, reliabilityTable } from '../../src/answer/calibration.js';
import { readQuestions, scoreAnswer, summarise, type QuestionOutcome } from '../../src/eval/answers.js';
import { SEED_DIR, tempRuntime } from '../fixtures/runtime.js';
import { answererOptions } from '../../src/runtime.js';

const QUESTIONS = path.resolve(import.meta.dirname, '..', 'fixtures', 'demo-questions.jsonl');

describe.runIf(process.env.SOURCEBOUND_FIT === '1')('calibration and thresholds on the demo question set', () => {
  it('fits the Platt constants stored in calibration.ts and prints the reliability table and threshold sweep', async () => {
    const { rt, config, cleanup } = await tempRuntime({ seed: { ingestOnEmpty: false } });
    try {
      await rt.ingestor.ingestPath(SEED_DIR, { collection: 'eval', remember: false });
      const questions = readQuestions(QUESTIONS);
      const base: AnswererOptions = answererOptions(config);
      const run = async (options: AnswererOptions) => {
        const answerer = createAnswerer({ retrieve: (q) => rt.retriever.search(q), embedder: rt.embedder, options });
        const rows: { outcome: QuestionOutcome; evidence: number }[] = [];
        for (const q of questions) {
          const r = await answerer.answer({ question: q.question, collection: 'eval', ...(q.history ? { history: q.history } : {}) });
          rows.push({ outcome: scoreAnswer(q, r, (id) => rt.repo.getDocumentText(id)), evidence: r.evidence });
        }
        return rows;
      };

      const rows = await run(base);
      // Answered questions with a verdict: right answers, and any answer to an unanswerable question (wrong).
      const answered = rows.filter((r) => !r.outcome.abstained && (r.outcome.correct !== null || r.outcome.kind === 'unanswerable'));
      const scores = answered.map((r) => r.evidence);
      const right = answered.map((r) => r.outcome.correct === true);
      const fit = fitIsotonic(scores, right);
      const platt = fitPlatt(scores, right);
      const table = reliabilityTable(scores.map((s) => calibrate(s)), right, 10).filter((b) => b.count > 0);
      const sweep = [];
      for (const t of [0.3, 0.35, 0.4, 0.45, 0.5, 0.55, 0.6]) {
        const s = summarise((await run({ ...base, minLexicalCoverage: t })).map((r) => r.outcome));
        sweep.push({ minLexicalCoverage: t, correct: `${s.answerable.correct}/${s.answerable.total}`, abstained: `${s.unanswerable.abstained}/${s.unanswerable.total}`, falseAbstentions: s.answerable.falseAbstentions });
      }
      // eslint-disable-next-line no-console
      console.log(JSON.stringify({ answered: answered.length, correct: right.filter(Boolean).length, fit, platt, stored: DEMO_CALIBRATION, table, sweep, points: answered.map((r) => [r.outcome.id, r.evidence, r.outcome.correct === true]) }, null, 1));
      expect(fit.knots).toEqual(DEMO_CALIBRATION.knots);
    } finally {
      cleanup();
    }
  }, 300_000);
});
