// Ratings of answers given at the reference desk, in PostgreSQL: kept when a collection goes, because they are
// the raw material of question sets.

import type { RatedSource, Rating } from '../types.js';
import type { AsyncRatingStore } from '../system-of-record.js';
import type { PgPool } from './connect.js';

type Row = Record<string, unknown>;

const fromRow = (r: Row): Rating => ({
  id: r.id as number,
  collection: r.collection as string,
  keyId: (r.key_id as string | null) ?? null,
  question: r.question as string,
  answeredQuestion: (r.answered_question as string | null) ?? null,
  history: r.history as Rating['history'],
  answer: r.answer as string,
  abstained: r.abstained as boolean,
  sources: r.sources as RatedSource[],
  helpful: r.helpful as boolean,
  comment: (r.comment as string | null) ?? null,
  createdAt: r.created_at as string,
});

export function pgRatings(pool: PgPool): AsyncRatingStore {
  return {
    async add(r) {
      const res = await pool.query(
        `INSERT INTO answer_ratings (collection, key_id, question, answered_question, history, answer, abstained, sources, helpful, comment)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9, $10) RETURNING *`,
        [r.collection, r.keyId, r.question, r.answeredQuestion, JSON.stringify(r.history), r.answer, r.abstained, JSON.stringify(r.sources), r.helpful, r.comment],
      );
      return fromRow(res.rows[0] as Row);
    },
    async list(opts = {}) {
      const res = opts.collection
        ? await pool.query('SELECT * FROM answer_ratings WHERE collection = $1 ORDER BY id', [opts.collection])
        : await pool.query('SELECT * FROM answer_ratings ORDER BY id');
      return res.rows.map((x) => fromRow(x as Row));
    },
  };
}
