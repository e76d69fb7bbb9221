import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterAll, beforeAll, expect, it } from 'vitest';
import { readQuestions } from '../../src/eval/answers.js';
import { main } from '../../src/cli.js';
import type { NewRating } from '../../src/feedback/index.js';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../../src/store/pg/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../fixtures/pg.js';

// Ratings given on any API node land in PostgreSQL; `feedback export` on that back end reads them there, not from
// the (empty) local store of the machine it runs on.
const rated = (over: Partial<NewRating> = {}): NewRating => ({
  collection: 'default',
  keyId: 'desk',
  question: 'How long do I have to claim a delay refund?',
  answeredQuestion: null,
  history: [],
  answer: 'Claims must be made within 28 days of the journey [1].',
  abstained: false,
  sources: [{ n: 1, documentId: 'd1', source: 'delay-refunds-2026.md', title: 'Delay Refunds', page: null, section: 'Delay Refunds > Claims', quote: 'within 28 days' }],
  helpful: true,
  comment: null,
  ...over,
});

describePg('feedback export on the PostgreSQL back end', () => {
  let db: TestDatabase;
  let sor: PgSystemOfRecord;
  let dir: string;
  beforeAll(async () => {
    db = await createTestDatabase();
    sor = await openPgSystemOfRecord(db.url, { max: 2 });
    dir = mkdtempSync(path.join(tmpdir(), 'sb-fb-pg-'));
  });
  afterAll(async () => {
    await sor?.close();
    await db?.drop();
    rmSync(dir, { recursive: true, force: true });
  });

  it('exports the ratings the database holds, narrowed to a collection when asked', async () => {
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
