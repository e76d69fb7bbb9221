import { afterEach, describe, expect, it } from 'vitest';
import { loadConfig } from '../../src/config/index.js';
import { retrieverOptions } from '../../src/retrieve/index.js';
import { DEFAULT_MMR } from '../../src/retrieve/mmr.js';
import { DEFAULT_RM3 } from '../../src/retrieve/rm3.js';
import { DEFAULT_FIELD_WEIGHTS, DEFAULT_TUNING } from '../../src/retrieve/retriever.js';
import type { Repository } from '../../src/store/index.js';
import { tempRuntime } from '../fixtures/runtime.js';

// The `retrieval` config section must reach the retriever the service builds: these tests count the FTS5
// queries one lexical search makes (RM3 makes a second, expanded one) through the runtime's own repository.

function countFts(repo: Repository): { calls: number; matches: string[] } {
  const seen = { calls: 0, matches: [] as string[] };
  const real = repo.searchFts.bind(repo);
  repo.searchFts = (collection, match, limit, weights, filter) => {
    seen.calls++;
    seen.matches.push(match);
    return real(collection, match, limit, weights, filter);
  };
  return seen;
}

describe('retrieval settings from the config', () => {
  let cleanup: (() => void) | undefined;
  afterEach(() => {
    cleanup?.();
    cleanup = undefined;
  });

  it('defaults equal the tuned settings the retriever falls back to', () => {
    const o = retrieverOptions(loadConfig({ env: {} }).retrieval);
    expect(o.denseWeight).toBe(0.5);
    expect(o.termRepeat).toBe(DEFAULT_TUNING.termRepeat);
    expect(o.rm3).toEqual(DEFAULT_RM3);
    expect(o.synonymWeight).toBeNull();
    expect(o.denseFeedback).toBe(DEFAULT_TUNING.denseFeedback);
    expect(o.mmr).toBeNull();
    expect(o.fieldWeights).toEqual(DEFAULT_FIELD_WEIGHTS);
    const on = retrieverOptions(loadConfig({ env: {}, overrides: { retrieval: { mmr: { enabled: true }, synonymWeight: 0.3, denseFeedback: 0 } } }).retrieval);
    expect(on.mmr).toEqual(DEFAULT_MMR);
    expect(on.synonymWeight).toBe(0.3);
    expect(on.denseFeedback).toBeNull();
  });

  it('rm3.enabled reaches the service retriever: two FTS queries per lexical search when on, one when off', async () => {
    const counts: number[] = [];
    for (const enabled of [true, false]) {
      const t = await tempRuntime({ retrieval: { rm3: { enabled }, lexicalEngine: 'fts5' } });
      cleanup = t.cleanup;
      await t.rt.ingestor.ingestPath(t.config.seed.path, { collection: t.config.seed.collection });
      const seen = countFts(t.rt.repo);
      const hits = await t.rt.retriever.search({ query: 'how long is the refund window for annual passes', collection: t.config.seed.collection, k: 5, mode: 'lexical' });
      expect(hits.length).toBeGreaterThan(0);
      counts.push(seen.calls);
      t.cleanup();
      cleanup = undefined;
    }
    expect(counts).toEqual([2, 1]);
  });

  it('termRepeat reaches the FTS5 expression', async () => {
    const t = await tempRuntime({ retrieval: { rm3: { enabled: false }, termRepeat: 2, lexicalEngine: 'fts5' } });
    cleanup = t.cleanup;
    await t.rt.ingestor.ingestPath(t.config.seed.path, { collection: t.config.seed.collection });
    const seen = countFts(t.rt.repo);
    // "refund" twice, "pass" once: weights 2 : 1 at most 2 repeats -> 2 and 1 copies.
    await t.rt.retriever.search({ query: 'refund refund pass', collection: t.config.seed.collection, k: 3, mode: 'lexical' });
    expect(seen.matches).toEqual(['"refund" OR "refund" OR "pass"']);
  });
});
