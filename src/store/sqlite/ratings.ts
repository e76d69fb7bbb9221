// Ratings of answers given at the reference desk: what was asked, what the service said, which
// sources it cited, and whether the member of staff found it helpful.

import type { NewRating, RatedSource, Rating, RatingStore } from '../types.js';
import type { Db } from './db.js';

interface Row {
  id: number;
  collection: string;
  key_id: string | null;
  question: string;
  answered_question: string | null;
  history: string;
  answer: string;
  abstained: number;
  sources: string;
  helpful: number;
  comment: string | null;
  created_at: string;
}

const fromRow = (r: Row): Rating => ({
  id: r.id,
  collection: r.collection,
  keyId: r.key_id,
  question: r.question,
  answeredQuestion: r.answered_question,
  history: JSON.parse(r.history) as Rating['history'],
  answer: r.answer,
  abstained: r.abstained === 1,
  sources: JSON.parse(r.sources) as RatedSource[],
  helpful: r.helpful === 1,
  comment: r.comment,
  createdAt: r.created_at,
});

export function sqliteRatings(db: Db, now: () => Date = () => new Date()): RatingStore {
  const insert = db.prepare(
    `INSERT INTO answer_ratings (collection, key_id, question, answered_question, history, answer, abstained, sources, helpful, comment, created_at)
     VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
  );
  const all = db.prepare('SELECT * FROM answer_ratings ORDER BY id');
  const ofCollection = db.prepare('SELECT * FROM answer_ratings WHERE collection = ? ORDER BY id');
  return {
    add(r) {
      const createdAt = now().toISOString();
      const info = insert.run(
        r.collection,
        r.keyId,
        r.question,
        r.answeredQuestion,
        JSON.stringify(r.history),
        r.answer,
        r.abstained ? 1 : 0,
        JSON.stringify(r.sources),
        r.helpful ? 1 : 0,
        r.comment,
        createdAt,
      );
      return { ...r, id: Number(info.lastInsertRowid), createdAt };
    },
    list(opts = {}) {
      const rows = (opts.collection ? ofCollection.all(opts.collection) : all.all()) as Row[];
      return rows.map(fromRow);
    },
  };
}
