import { readFileSync } from 'node:fs';
import type { Judgments } from './metrics.js';

export interface CorpusDoc {
  id: string;
  title: string;
  text: string;
}

export interface Query {
  id: string;
  text: string;
}

/** Reads JSONL ({id, title?, text}); a bad line is an error naming the file and line. */
export function readJsonl<T>(file: string, check: (v: Record<string, unknown>, line: number) => T): T[] {
  const out: T[] = [];
  readFileSync(file, 'utf8')
    .split('\n')
    .forEach((line, i) => {
      if (line.trim() === '') return;
      let v: unknown;
      try {
        v = JSON.parse(line);
      } catch (err) {
        throw new Error(`${file}:${i + 1}: not valid JSON (${(err as Error).message})`);
      }
      if (v === null || typeof v !== 'object' || Array.isArray(v)) throw new Error(`${file}:${i + 1}: expected a JSON object`);
      out.push(check(v as Record<string, unknown>, i + 1));
    });
  return out;
}

export function readCorpus(file: string): CorpusDoc[] {
  return readJsonl(file, (v, line) => {
    if (typeof v.text !== 'string' || (typeof v.id !== 'string' && typeof v.id !== 'number')) {
      throw new Error(`${file}:${line}: each line needs "id" and "text"`);
    }
    return { id: String(v.id), title: typeof v.title === 'string' ? v.title : '', text: v.text };
  });
}

export function readQueries(file: string): Query[] {
  return readJsonl(file, (v, line) => {
    if (typeof v.text !== 'string' || (typeof v.id !== 'string' && typeof v.id !== 'number')) {
      throw new Error(`${file}:${line}: each line needs "id" and "text"`);
    }
    return { id: String(v.id), text: v.text };
  });
}

/** TREC qrels: `qid iter docid gain` per line, whitespace separated. */
export function parseQrels(text: string, file = 'qrels'): Map<string, Map<string, number>> {
  const out = new Map<string, Map<string, number>>();
  text.split('\n').forEach((line, i) => {
    const t = line.trim();
    if (t === '' || t.startsWith('#')) return;
    const parts = t.split(/\s+/);
    const gain = Number(parts[3]);
    if (parts.length < 4 || !Number.isFinite(gain)) throw new Error(`${file}:${i + 1}: expected "qid 0 docid gain"`);
    const q = out.get(parts[0]!) ?? new Map<string, number>();
    q.set(parts[2]!, gain);
    out.set(parts[0]!, q);
  });
  return out;
}

export function readQrels(file: string): Map<string, Judgments> {
  return parseQrels(readFileSync(file, 'utf8'), file);
}

/** One TREC run line per result: `qid Q0 docid rank score tag`. */
export function formatRun(runs: ReadonlyMap<string, readonly { doc: string; score: number }[]>, tag: string): string {
  const lines: string[] = [];
  for (const [qid, ranked] of runs) {
    ranked.forEach((r, i) => lines.push(`${qid} Q0 ${r.doc} ${i + 1} ${r.score.toFixed(6)} ${tag}`));
  }
  return lines.length ? `${lines.join('\n')}\n` : '';
}
