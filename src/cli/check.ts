// `sourcebound check`: is the store sound? The database's and the full-text index's own checks, the vector
// index files against the database, and orphan files; a report (text, or one JSON object with --json) and exit
// code 0 when clean, 1 when a problem was found.

import { existsSync } from 'node:fs';
import { checkStore, openStore, storePaths } from '../store/index.js';
import { CliError, EXIT, type CliContext } from './context.js';

export function check(ctx: CliContext, opts: { json?: boolean }): number {
  const cfg = ctx.config();
  const { database } = storePaths(cfg.dataDir);
  if (!existsSync(database)) throw new CliError(`no database at ${database}`);
  const store = openStore(database);
  let report;
  try {
    report = checkStore(store, cfg.dataDir);
  } finally {
    store.close();
  }
  if (opts.json) {
    ctx.io.out(`${JSON.stringify(report)}\n`);
  } else {
    const c = report.checked;
    const lines = [
      `checked ${database}: ${c.collections} collections, ${c.indexFiles} vector index files, ${c.originals} kept originals, ${c.uploads} uploads`,
      ...report.problems.map((p) => `problem: ${p.check}: ${p.message}${p.path ? ` (${p.path})` : ''}`),
      ...report.notes.map((n) => `note: ${n}`),
      report.ok ? 'no problems found' : `${report.problems.length} problem${report.problems.length === 1 ? '' : 's'} found`,
    ];
    ctx.io.out(`${lines.join('\n')}\n`);
  }
  return report.ok ? EXIT.ok : EXIT.failed;
}
