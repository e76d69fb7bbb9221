import { describe, expect, it } from 'vitest';
import type { IngestSummary } from '../../src/ingest/pipeline.js';
import { formatProgress, formatSummary, summaryJson } from '../../src/ingest/progress.js';

const summary: IngestSummary = {
  documents: { added: 3, updated: 1, renamed: 0, removed: 0, unchanged: 9, failed: 2 },
  chunks: { embedded: 40, reused: 12, removed: 0 },
  failures: [
    { source: 'locked.pdf', reason: 'encrypted PDF (password protected) is not supported' },
    { source: 'empty.txt', reason: 'the file is empty' },
  ],
  skipped: ['notes'],
  seconds: 1.25,
};

describe('formatProgress', () => {
  it('shows a bar of files done, then files, failures, pages and chunks with their rates, then the current file', () => {
    const line = formatProgress({ filesDone: 4, filesTotal: 10, failed: 1, pages: 30, chunks: 120, current: 'staff-handbook.pdf' }, 2, 200);
    expect(line).toBe('[########............]  40%  files 4/10  failed 1  pages 30 (15/s)  chunks 120 (60/s)  staff-handbook.pdf');
  });

  it('leaves out the failure count while nothing failed and shows one decimal for slow rates', () => {
    const line = formatProgress({ filesDone: 1, filesTotal: 2, failed: 0, pages: 3, chunks: 5, current: 'a.md' }, 2, 200);
    expect(line).toBe('[##########..........]  50%  files 1/2  pages 3 (1.5/s)  chunks 5 (2.5/s)  a.md');
  });

  it('fits the terminal width so a carriage return overwrites it cleanly', () => {
    const line = formatProgress({ filesDone: 1, filesTotal: 2, failed: 0, pages: 0, chunks: 0, current: 'x'.repeat(300) }, 0, 60);
    expect(line.length).toBe(59);
    expect(line.endsWith('…')).toBe(true);
  });
});

describe('the ingest summaries', () => {
  it('print the documented JSON shape with every failure and its reason', () => {
    const parsed = JSON.parse(summaryJson(summary)) as Record<string, unknown>;
    expect(Object.keys(parsed).slice(0, 4)).toEqual(['documents', 'chunks', 'failures', 'seconds']);
    expect(Object.keys(parsed.documents as object)).toEqual(['added', 'updated', 'renamed', 'removed', 'unchanged', 'failed']);
    expect(Object.keys(parsed.chunks as object)).toEqual(['embedded', 'reused', 'removed']);
    expect(parsed).toMatchObject({
      documents: { added: 3, updated: 1, unchanged: 9, failed: 2 },
      chunks: { embedded: 40, reused: 12 },
      failures: summary.failures,
      seconds: 1.25,
    });
  });

  it('print one human line per failure after the counts', () => {
    const lines = formatSummary(summary).split('\n');
    expect(lines[0]).toBe('documents: 3 added, 1 updated, 9 unchanged, 0 removed, 2 failed');
    expect(lines.slice(-2)).toEqual([
      'failed:    locked.pdf: encrypted PDF (password protected) is not supported',
      'failed:    empty.txt: the file is empty',
    ]);
    expect(lines).toContain('skipped:   1 file(s) that are not documents');
  });
});
