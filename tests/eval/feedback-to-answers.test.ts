import { mkdirSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { Runtime } from '../../src/runtime.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { CLI } from '../fixtures/serve.js';
import { runSync } from '../fixtures/wait.js';

// `feedback export` writes questions that name the collection they were asked of; `eval answers` without
// --docs scores them against that collection's folders as the store remembers them, or says what to do.

let rt: Runtime;
let dataDir: string;
let cleanup: () => void;
let folder: string;

beforeAll(async () => {
  ({ rt, dataDir, cleanup } = await tempRuntime({ seed: { ingestOnEmpty: false } }));
  folder = path.join(dataDir, 'timetable-folder');
  mkdirSync(folder);
  writeFileSync(path.join(folder, 'night-buses.md'), '# Night buses\n\nNight buses leave Marrowgate bus station every 30 minutes after midnight.\n');
  await rt.ingestor.ingestPath(folder, { collection: 'timetables' });
  const doc = rt.repo.listDocuments('timetables')[0]!;
  rt.store.ratings.add({
    collection: 'timetables',
    keyId: null,
    question: 'How often do night buses leave Marrowgate bus station?',
    answeredQuestion: null,
    history: [],
    answer: 'Night buses leave Marrowgate bus station every 30 minutes after midnight. [1]',
    abstained: false,
    sources: [{ n: 1, documentId: doc.id, source: 'night-buses.md', title: 'Night buses', page: null, section: 'Night buses', quote: 'every 30 minutes after midnight' }],
    helpful: true,
    comment: null,
  });
  rt.close();
});
afterAll(() => cleanup());

const cli = (args: string[], extra: Record<string, string> = {}) =>
  runSync(process.execPath, [CLI, ...args], {
    env: { ...process.env, SOURCEBOUND_DATA_DIR: dataDir, SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent', ...extra },
    what: `sourcebound ${args.slice(0, 2).join(' ')}`,
    timeoutMs: 120_000,
  });

describe('feedback export, then eval answers without --docs', () => {
  it("scores the exported questions against the folders the store remembers for their collection", () => {
    const out = path.join(dataDir, 'exported', 'questions.jsonl');
    mkdirSync(path.dirname(out));
    expect(cli(['feedback', 'export', '--out', out]).status).toBe(0);
    const r = cli(['eval', 'answers', '--questions', out, '--json']);
    expect(r.status, r.stderr).toBe(0);
    expect(r.stderr).toContain(`scoring against the folders the store remembers: timetables: ${folder}`);
    const report = JSON.parse(r.stdout) as { questions: number; hit: { n: number; total: number } };
    expect(report.questions).toBe(1);
    expect(report.hit).toMatchObject({ n: 1, total: 1 });
  });

  it('says what to do when the store does not know a collection the questions name', () => {
    const file = path.join(dataDir, 'other', 'questions.jsonl');
    mkdirSync(path.dirname(file));
    writeFileSync(file, `${JSON.stringify({ id: 'q1', question: 'Where are lost umbrellas kept?', answerable: true, doc: 'lost-property.md', collection: 'lost-property' })}\n`);
    const r = cli(['eval', 'answers', '--questions', file]);
    expect(r.status).toBe(1);
    expect(r.stderr).toContain('the questions name collection "lost-property"');
    expect(r.stderr).toContain('give --docs DIR with one folder per collection');
  });
});
