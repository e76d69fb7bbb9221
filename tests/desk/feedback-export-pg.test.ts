import { writeFileSync } from 'node:fs';
import path from 'node:path';
import { expect, it } from 'vitest';
import { readQuestions } from '../../src/eval/answers.js';
import { main } from '../../src/cli.js';
import { rated } from '../fixtures/ratings.js';
import { describePg, pgSuiteState } from '../fixtures/pg.js';

// Ratings given on any API node land in PostgreSQL; `feedback export` on that back end reads them there, not from
// the (empty) local store of the machine it runs on.

describePg('feedback export on the PostgreSQL back end', () => {
  const pg = pgSuiteState({ tempPrefix: 'sb-fb-pg-', max: 2 });

  it('exports the ratings the database holds, narrowed to a collection when asked', async () => {
    const { db, sor, dir } = pg;
    await sor.ratings.add(rated());
    await sor.ratings.add(rated({ question: 'What about dogs?', abstained: true, helpful: false, sources: [] }));
    await sor.ratings.add(rated({ collection: 'staff', question: 'When does the depot open?', answer: 'The depot opens at 05:30 [1].' }));
    const config = path.join(dir, 'config.json');
    writeFileSync(config, JSON.stringify({ storage: { backend: 'postgres' } }));
    const env = { SOURCEBOUND_CONFIG: config, SOURCEBOUND_DATABASE_URL: db.url, SOURCEBOUND_DATA_DIR: path.join(dir, 'data') };
    let err = '';
    const io = { out: () => undefined, err: (s: string) => void (err += s), errIsTTY: false, errColumns: 0 };
    const out = path.join(dir, 'set.jsonl');
    expect(await main(['feedback', 'export', '--out', out], env, io)).toBe(0);
    expect(err).toContain('3 ratings → 2 questions');
    expect(readQuestions(out).map((q) => q.question).sort()).toEqual(['How long do I have to claim a delay refund?', 'When does the depot open?']);
    err = '';
    expect(await main(['feedback', 'export', '--out', out, '--collection', 'staff'], env, io)).toBe(0);
    expect(err).toContain('1 ratings → 1 questions');
    expect(readQuestions(out).map((q) => q.collection)).toEqual(['staff']);
  });
});
