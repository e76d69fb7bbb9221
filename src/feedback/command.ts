// `sourcebound feedback export [--out F] [--collection C]`: desk ratings → a question set for
// `sourcebound eval answers --questions F`.

import { existsSync, renameSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { loadConfig } from '../config/index.js';
import { openStore, storePaths, type Rating } from '../store/index.js';
import { openPgSystemOfRecord } from '../store/pg/index.js';
import { ratingsToQuestions, toJsonl } from './export.js';

export interface FeedbackIo {
  stdout: (s: string) => void;
  stderr: (s: string) => void;
}

const defaultIo: FeedbackIo = { stdout: (s) => process.stdout.write(s), stderr: (s) => process.stderr.write(s) };

/** `values` are the command's options, as the command line read them. */
export async function exportFeedback(
  values: { out?: string; collection?: string },
  env: Record<string, string | undefined>,
  io: FeedbackIo = defaultIo,
): Promise<number> {
  const cfg = loadConfig({ env });
  const filter = values.collection ? { collection: values.collection } : {};
  let ratings: Rating[];
  if (cfg.storage.backend === 'postgres' && cfg.storage.databaseUrl !== null) {
    // Ratings given on any API node are in the database; the local store of this machine holds none of them.
    const sor = await openPgSystemOfRecord(cfg.storage.databaseUrl, { max: 1 });
    try {
      ratings = await sor.ratings.list(filter);
    } finally {
      await sor.close();
    }
  } else {
    const { database } = storePaths(cfg.dataDir);
    if (!existsSync(database)) {
      io.stderr(`sourcebound feedback export: no database at ${database}\n`);
      return 1;
    }
    const store = openStore(database);
    try {
      ratings = store.ratings.list(filter);
    } finally {
      store.close();
    }
  }
  const { questions, skipped } = ratingsToQuestions(ratings);
  const text = toJsonl(questions);
  const count = (k: string) => questions.filter((q) => q.kind === k).length;
  const summary =
    `${ratings.length} ratings → ${questions.length} questions (${count('answerable')} answerable, ${count('follow-up')} follow-up, ` +
    `${count('unanswerable')} unanswerable); ${skipped.length} skipped\n` +
    skipped.map((s) => `  skipped ${s.id} "${s.question}": ${s.reason}\n`).join('');
  if (values.out) {
    const out = path.resolve(values.out);
    // Written beside the target and renamed, so a reader never sees half a file.
    const tmp = `${out}.${process.pid}.tmp`;
    writeFileSync(tmp, text);
    renameSync(tmp, out);
    io.stderr(`${summary}written to ${out}\n`);
  } else {
    io.stdout(text);
    io.stderr(summary);
  }
  return 0;
}
