import { existsSync, mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { describe, expect, it } from 'vitest';
import { evaluateRetrieval, ndcgAt, averagePrecision, parseQrels } from '../../src/eval/index.js';

const FIX = path.resolve(import.meta.dirname, '..', 'fixtures', 'eval');

describe('sourcebound eval retrieval', () => {
  it('refuses to rank a collection of a store that does not exist, and creates nothing there', async () => {
    const missing = path.join(mkdtempSync(path.join(tmpdir(), 'sb-none-')), 'no-such-data');
    await expect(
      evaluateRetrieval({
        collection: 'cisi',
        queries: path.join(FIX, 'queries.jsonl'),
        qrels: path.join(FIX, 'qrels.txt'),
        mode: 'lexical',
        depth: 10,
        env: { SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent', SOURCEBOUND_DATA_DIR: missing },
      }),
    ).rejects.toThrow(/no store in .*no-such-data to rank collection "cisi"/);
    expect(existsSync(missing)).toBe(false);
  });

  it('reports metrics that an independent computation from its own TREC run file reproduces', async () => {
    const runFile = path.join(mkdtempSync(path.join(tmpdir(), 'sb-run-')), 'run.txt');
    const r = await evaluateRetrieval({
      corpus: path.join(FIX, 'corpus.jsonl'),
      queries: path.join(FIX, 'queries.jsonl'),
      qrels: path.join(FIX, 'qrels.txt'),
      mode: 'lexical',
      depth: 1000,
      env: { SOURCEBOUND_EMBEDDER: 'hashing', SOURCEBOUND_LOG_LEVEL: 'silent' },
      runFile,
    });
    expect(r.queries).toBe(3);
    expect(r.documents).toBe(5);
    // Re-read the run file (qid Q0 docid rank score tag) and recompute.
    const runs = new Map<string, string[]>();
    for (const line of readFileSync(runFile, 'utf8').trim().split('\n')) {
      const [qid, q0, doc, rank, score, tag] = line.split(' ');
      expect(q0).toBe('Q0');
      expect(Number.isFinite(Number(score))).toBe(true);
      expect(tag).toBe('sourcebound-lexical');
      const list = runs.get(qid!) ?? [];
      expect(Number(rank)).toBe(list.length + 1);
      list.push(doc!);
      runs.set(qid!, list);
    }
    const qrels = parseQrels(readFileSync(path.join(FIX, 'qrels.txt'), 'utf8'));
    const mean = (f: (q: string) => number) => [...qrels.keys()].reduce((s, q) => s + f(q), 0) / qrels.size;
    expect(r['ndcg@10']).toBeCloseTo(mean((q) => ndcgAt(runs.get(q) ?? [], qrels.get(q)!, 10)), 4);
    expect(r.map).toBeCloseTo(mean((q) => averagePrecision(runs.get(q) ?? [], qrels.get(q)!)), 4);
    // Hand check on this tiny corpus: each query's best-judged document is ranked first by BM25.
    expect(runs.get('q1')![0]).toBe('d1');
    expect(runs.get('q2')![0]).toBe('d3');
    expect(runs.get('q3')![0]).toBe('d5');
    expect(r['mrr@10']).toBe(1);
  });
});
