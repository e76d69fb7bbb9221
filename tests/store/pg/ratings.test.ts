import { afterAll, beforeAll, expect, it } from 'vitest';
import { openPgSystemOfRecord, type PgSystemOfRecord } from '../../../src/store/pg/index.js';
import type { NewRating } from '../../../src/store/index.js';
import { createTestDatabase, describePg, type TestDatabase } from '../../fixtures/pg.js';

const rating = (over: Partial<NewRating> = {}): NewRating => ({
  collection: 'staff',
  keyId: 'desk-1',
  question: 'When does the reading room open?',
  answeredQuestion: null,
  history: [{ role: 'user', content: 'Hello' }, { role: 'assistant', content: 'How can I help?' }],
  answer: 'At nine [1].',
  abstained: false,
  sources: [{ n: 1, documentId: 'handbook', source: 'handbook.md', title: 'Reading room handbook', page: null, section: 'Opening hours', quote: 'opens at nine' }],
  helpful: true,
  comment: null,
  ...over,
});

describePg('PostgreSQL answer ratings', () => {
  let db: TestDatabase;
  let sor: PgSystemOfRecord;
  beforeAll(async () => {
    db = await createTestDatabase();
    sor = await openPgSystemOfRecord(db.url, { max: 2 });
  });
  afterAll(async () => {
    await sor?.close();
    await db?.drop();
  });

  it('keeps each rating as given and lists them oldest first, by collection when asked', async () => {
    const first = await sor.ratings.add(rating());
    const second = await sor.ratings.add(rating({ collection: 'public', helpful: false, abstained: true, comment: 'wrong desk', keyId: null, answeredQuestion: 'When does the public desk open?' }));
    const third = await sor.ratings.add(rating({ question: 'Can rare volumes leave the room?' }));
    expect(first).toMatchObject(rating());
    expect(first.createdAt).toMatch(/^\d{4}-\d\d-\d\dT/);
    expect([first.id < second.id, second.id < third.id]).toEqual([true, true]);
    expect((await sor.ratings.list()).map((r) => r.id)).toEqual([first.id, second.id, third.id]);
    expect(await sor.ratings.list({ collection: 'staff' })).toEqual([first, third]);
    expect(await sor.ratings.list({ collection: 'public' })).toEqual([second]);
    expect(await sor.ratings.list({ collection: 'none' })).toEqual([]);
  });
});
