import { mkdtempSync, rmSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { createLexiconSource, parseTermsFile } from '../../src/answer/lexicon-source.js';
import { questionTerms, termMatch } from '../../src/answer/terms.js';
import { contentStems } from '../../src/answer/words.js';

const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

function setup(texts: Record<string, string[]>) {
  const dir = mkdtempSync(path.join(tmpdir(), 'sb-terms-'));
  dirs.push(dir);
  const generations = new Map<string, number>(Object.keys(texts).map((c) => [c, 1]));
  const warnings: string[] = [];
  let builds = 0;
  const source = createLexiconSource({
    generation: (c) => generations.get(c) ?? null,
    texts: (c) => {
      builds++;
      return texts[c] ?? [];
    },
    termsDir: dir,
    onWarning: (msg, detail) => warnings.push(`${msg}: ${String(detail.err)}`),
  });
  return { dir, source, generations, warnings, builds: () => builds };
}

describe('terms files', () => {
  it('validates a terms file and names every problem', () => {
    expect(parseTermsFile('{"groups":[["reimbursement","repayment"]]}', 'f.json').groups).toHaveLength(1);
    expect(() => parseTermsFile('{"groups":[["only-one"]]}', 'f.json')).toThrow(/groups\.0/);
    expect(() => parseTermsFile('{"groups":[], "extra": 1}', 'f.json')).toThrow(/extra/);
    expect(() => parseTermsFile('not json', 'f.json')).toThrow(/not valid JSON/);
  });

  it('lets a question worded one way match a sentence worded the operator\'s way, and re-reads the file when it changes', () => {
    const { dir, source } = setup({ depot: ['Reimbursement is made within 10 days.'] });
    const sentence = contentStems('Reimbursement is made within 10 days.');
    const term = () => questionTerms('When is the repayment made?', source('depot')).find((t) => t.label === 'repayment');
    expect(termMatch(term()!, sentence)).toBe(0);
    const file = path.join(dir, 'depot.json');
    writeFileSync(file, JSON.stringify({ groups: [['reimbursement', 'repayment']] }));
    expect(termMatch(term()!, sentence)).toBe(1);
    writeFileSync(file, JSON.stringify({ groups: [['reimbursement', 'refund', 'repayment']] }));
    // A later modification time, as an edit would give, whatever the file system's clock resolution.
    utimesSync(file, new Date(), new Date(Date.now() + 5000));
    expect(source('depot').groups?.[0]).toContain('refund');
  });

  it('ignores a broken terms file with a warning instead of failing answers', () => {
    const { dir, source, warnings } = setup({ depot: ['Text.'] });
    writeFileSync(path.join(dir, 'depot.json'), '{"groups": [["lonely"]]}');
    expect(source('depot').groups).toBeUndefined();
    expect(warnings.join('\n')).toMatch(/terms file ignored/);
  });

  it('rebuilds the collection vocabulary only when the collection changes', () => {
    const { source, generations, builds } = setup({ depot: ['Trams run every ten minutes.'] });
    expect(source('depot').vocabulary?.df('tram')).toBe(1);
    source('depot');
    expect(builds()).toBe(1);
    generations.set('depot', 2);
    source('depot');
    expect(builds()).toBe(2);
    expect(source('nowhere').vocabulary).toBeUndefined();
  });
});
