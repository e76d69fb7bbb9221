import { describe, expect, it } from 'vitest';
import { planSwap, type SwapInput } from '../../src/ingest/full-reindex.js';
import type { DocumentKey } from '../../src/store/index.js';

const ROOT = '/docs';
const NOW = 'S';
const key = (id: string, source: string, contentHash: string, over: Partial<DocumentKey> = {}): DocumentKey => ({
  id,
  source,
  root: ROOT,
  contentHash,
  settingsKey: NOW,
  updatedAt: '2026-01-01T00:00:00.000Z',
  ...over,
});

const input = (built: DocumentKey[], live: DocumentKey[], over: Partial<SwapInput> = {}): SwapInput => ({
  built,
  live,
  fileExists: () => true,
  walked: new Set([ROOT]),
  failedInBuild: () => false,
  catchUpFrom: '2026-06-01T00:00:00.000Z',
  settingsKey: NOW,
  ...over,
});

const ids = (docs: readonly DocumentKey[]): string[] => docs.map((d) => d.id).sort();

describe('the full re-index swap plan', () => {
  it('counts a rebuilt file as updated, the same bytes under a new name as renamed, a new file as added, a missing one as removed', () => {
    const live = [key('l-fares', 'fares.md', 'h1'), key('l-old', 'old-name.md', 'h2'), key('l-gone', 'gone.md', 'h3')];
    const built = [key('s-fares', 'fares.md', 'h1b'), key('s-new-name', 'new-name.md', 'h2'), key('s-added', 'added.md', 'h4')];
    const plan = planSwap(input(built, live));
    expect(ids(plan.moves)).toEqual(['s-added', 's-fares', 's-new-name']);
    expect(ids(plan.drop)).toEqual(['l-fares', 'l-gone', 'l-old']);
    expect(plan.keep).toEqual([]);
    expect(plan.stale).toEqual([]);
    expect(plan.counts).toEqual({ added: 1, updated: 1, renamed: 1, removed: 1 });
  });

  it('keeps the collection\'s copy when it changed after the catch-up pass, and leaves the shadow\'s copy stale', () => {
    const live = [key('l-upload', 'upload.md', 'new', { updatedAt: '2026-06-02T00:00:00.000Z' })];
    const built = [key('s-upload', 'upload.md', 'old')];
    const plan = planSwap(input(built, live));
    expect(plan.moves).toEqual([]);
    expect(ids(plan.keep)).toEqual(['l-upload']);
    expect(ids(plan.stale)).toEqual(['s-upload']);
    expect(plan.counts).toEqual({ added: 0, updated: 0, renamed: 0, removed: 0 });
  });

  it('keeps what the build had no say over: text sent through the API, other folders, unreadable files with current settings', () => {
    const live = [
      key('l-api', 'note.txt', 'a', { root: null }),
      key('l-other', 'other.md', 'b', { root: '/elsewhere' }),
      key('l-unreadable', 'broken.pdf', 'c'),
      key('l-unreadable-old', 'broken-too.pdf', 'd', { settingsKey: 'older settings' }),
    ];
    const plan = planSwap(input([], live, { failedInBuild: (d) => d.source.startsWith('broken') }));
    expect(ids(plan.keep)).toEqual(['l-api', 'l-other', 'l-unreadable']);
    // Made with other settings, it cannot stay: it goes, and is counted as removed.
    expect(ids(plan.drop)).toEqual(['l-unreadable-old']);
    expect(plan.counts.removed).toBe(1);
  });

  it('does not swap in a shadow document whose file went away since the build', () => {
    const built = [key('s-kept', 'kept.md', 'k'), key('s-deleted', 'deleted.md', 'x')];
    const plan = planSwap(input(built, [], { fileExists: (d) => d.source !== 'deleted.md' }));
    expect(ids(plan.moves)).toEqual(['s-kept']);
    expect(ids(plan.stale)).toEqual(['s-deleted']);
    expect(plan.counts).toEqual({ added: 1, updated: 0, renamed: 0, removed: 0 });
  });

  it('counts one rename per dropped document with those bytes', () => {
    const live = [key('l-a', 'a.md', 'same')];
    const built = [key('s-b', 'b.md', 'same'), key('s-c', 'c.md', 'same')];
    expect(planSwap(input(built, live)).counts).toEqual({ added: 1, updated: 0, renamed: 1, removed: 0 });
  });
});
