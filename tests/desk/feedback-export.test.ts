import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { readQuestions } from '../../src/eval/answers.js';
import { main } from '../../src/cli.js';
import { keyFigures, ratingsToQuestions, toJsonl } from '../../src/feedback/index.js';
import { rated } from '../fixtures/ratings.js';
import { openStore, storePaths } from '../../src/store/index.js';


describe('desk ratings as a question set', () => {
  it('finds the figures an answer turns on', () => {
    expect(keyFigures('A Day Rider costs £8.40 [1]; refunds close after 28 days and 2 working days [2], from 07:30.')).toEqual(['£8.40', '28 days', '2 working days']);
    expect(keyFigures('Bikes are allowed outside peak hours [1].')).toEqual([]);
  });

  it('maps helpful/not helpful and answered/abstained onto labels, latest rating first', () => {
    const db = openStore(':memory:');
    const store = db.ratings;
    store.add(rated({ helpful: false }));
    store.add(rated({ comment: 'Correct after the 2026 change.' })); // the same question again: this one counts
    store.add(rated({ question: 'Is there wifi on the trams?', answer: 'The documents do not cover this question.', abstained: true, sources: [] }));
    store.add(rated({ question: 'Can I bring a scooter?', answer: 'Scooters are carried folded [1].', helpful: false, comment: 'Wrong policy.' }));
    store.add(rated({ question: 'What about dogs?', answer: 'The documents do not cover this question.', abstained: true, helpful: false, sources: [] }));
    store.add(rated({ question: 'And on buses?', history: [{ role: 'user', content: 'Are bikes allowed on trams?' }, { role: 'assistant', content: 'Outside peak hours [1].' }], answer: 'Bikes are carried on buses for £1.50 [1].', sources: [{ n: 1, documentId: 'd2', source: 'bikes.pdf', title: 'Bikes', page: 3, section: 'Bikes', quote: 'q' }] }));
    const { questions, skipped } = ratingsToQuestions(store.list());
    db.close();
    expect(questions.map((q) => [q.id, q.kind])).toEqual([
      ['fb-2', 'answerable'],
      ['fb-3', 'unanswerable'],
      ['fb-4', 'unanswerable'],
      ['fb-6', 'follow-up'],
    ]);
    expect(questions[0]).toMatchObject({ answerable: true, doc: 'delay-refunds-2026.md', must_contain: ['28 days'], collection: 'default' });
    expect(questions[1]).toMatchObject({ answerable: false, doc: null, must_contain: [] });
    expect(questions[0]!.note).toContain('Correct after the 2026 change.');
    expect(questions[2]!.note).toContain('Wrong policy.');
    expect(questions[3]).toMatchObject({ history: [{ role: 'user' }, { role: 'assistant' }], doc: 'bikes.pdf', page: 3, section: 'Bikes', must_contain: ['£1.50'] });
    expect(skipped.map((s) => s.id)).toEqual(['fb-5']);

    // What `sourcebound eval answers --questions F` reads back.
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-fb-'));
    try {
      const file = path.join(dir, 'q.jsonl');
      writeFileSync(file, toJsonl(questions));
      const read = readQuestions(file);
      // Read as the shared format, labels as written.
      expect(read.map((q) => [q.id, q.kind, q.question, q.answerable, q.doc, q.mustContain])).toEqual(questions.map((q) => [q.id, q.kind, q.question, q.answerable, q.doc, q.must_contain]));
      expect(read[0]!.collection).toBe('default');
      expect(read[3]!.history).toHaveLength(2);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });

  it('`feedback export --out F` writes the file from the data folder, and names what it skipped', async () => {
    const dir = mkdtempSync(path.join(tmpdir(), 'sb-fb-cli-'));
    try {
      const db = openStore(storePaths(dir).database);
      db.ratings.add(rated());
      db.ratings.add(rated({ question: 'What about dogs?', abstained: true, helpful: false, sources: [] }));
      db.close();
      const out = path.join(dir, 'set.jsonl');
      let err = '';
      const io = { out: () => undefined, err: (s: string) => void (err += s), errIsTTY: false, errColumns: 0 };
      const code = await main(['feedback', 'export', '--out', out], { SOURCEBOUND_DATA_DIR: dir }, io);
      expect(code).toBe(0);
      expect(readQuestions(out).map((q) => q.kind)).toEqual(['answerable']);
      expect(err).toContain('2 ratings → 1 questions');
      expect(err).toContain('skipped fb-2 "What about dogs?"');
      err = '';
      expect(await main(['feedback', 'import'], {}, io)).toBe(2);
      expect(err).toMatch(/^sourcebound feedback: unknown command 'import'/);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
