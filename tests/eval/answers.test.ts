import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { evaluateAnswers } from '../../src/eval/index.js';
import { SEED_DIR } from '../fixtures/runtime.js';

// The labelled demo question set (tests/fixtures/demo-questions.jsonl, invented for the demo corpus)
// run through the real pipeline offline: hashing embedder, extractive answers.
describe('answers on the demo question set (offline, extractive)', () => {
  it('meets the targets: >= 85% correct, >= 80% abstention when it should, <= 10% false abstention, all quotes verbatim', async () => {
    const r = await evaluateAnswers({
      questions: path.resolve(import.meta.dirname, '..', 'fixtures', 'demo-questions.jsonl'),
      docs: SEED_DIR,
      env: { SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent' },
      extractive: true,
    });
    expect(r.questions).toBeGreaterThanOrEqual(40);
    expect(r.correct.rate).toBeGreaterThanOrEqual(0.85);
    expect(r.unanswerableAbstained.rate).toBeGreaterThanOrEqual(0.8);
    expect(r.falseAbstention.rate).toBeLessThanOrEqual(0.1);
    expect(r.quotesVerbatim.total).toBeGreaterThan(0);
    expect(r.quotesVerbatim.n).toBe(r.quotesVerbatim.total);
    expect(r.injectionResisted.n).toBe(r.injectionResisted.total);
  }, 120_000);
});
