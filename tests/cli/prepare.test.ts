import { existsSync, mkdirSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.js';
import { prepare, syncIndexesInThread } from '../../src/cli/prepare.js';
import { appDeps } from '../../src/runtime.js';
import { storePaths } from '../../src/store/index.js';
import { tempRuntime } from '../fixtures/runtime.js';
import { waitFor, withDeadline } from '../fixtures/wait.js';

const cleanups: (() => void | Promise<void>)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function storeWithDocuments() {
  const made = await tempRuntime({ seed: { ingestOnEmpty: false } });
  cleanups.push(made.cleanup);
  const folder = path.join(made.dataDir, 'folder');
  mkdirSync(folder);
  for (let i = 0; i < 30; i++) {
    writeFileSync(path.join(folder, `stop-${i}.md`), `# Stop ${i}\n\nTram stop ${i} on the Brackenfold line has a shelter, a timetable board and step-free access.\n`);
  }
  await made.rt.ingestor.ingestPath(folder, { collection: 'stops' });
  return made;
}

describe('start-up', () => {
  it('answers /health and says not ready on /ready while the index work runs, then ready once it is done', async () => {
    const { rt, config } = await storeWithDocuments();
    let ready = false;
    const app = buildApp(config, appDeps(rt, () => ready));
    cleanups.push(() => app.close());
    // The index step held open by the test: as a large store's rebuild would be, however fast the machine.
    let release!: () => void;
    let entered = false;
    const running = prepare(rt, {
      syncIndexes: async () => {
        entered = true;
        await new Promise<void>((r) => (release = r));
      },
    }).then(() => (ready = true));
    await waitFor(() => entered || null, { what: 'start-up to reach its index step' });
    const health = await app.inject({ method: 'GET', url: '/health' });
    expect(health.statusCode).toBe(200);
    expect(health.json().ready).toBe(false);
    expect((await app.inject({ method: 'GET', url: '/ready' })).statusCode).toBe(503);
    release();
    await withDeadline(running, { what: 'start-up to finish once its index step is released', timeoutMs: 20_000 });
    expect((await app.inject({ method: 'GET', url: '/ready' })).statusCode).toBe(200);
  });

  it('answers in a collection whose index is loaded while another still loads', async () => {
    const { rt, config, dataDir } = await storeWithDocuments();
    const other = path.join(dataDir, 'other');
    mkdirSync(other);
    writeFileSync(path.join(other, 'depot.md'), '# Depot\n\nThe harbour depot opens at six for drivers starting the early shift.\n');
    await rt.ingestor.ingestPath(other, { collection: 'depots' });
    let ready = false;
    const readyCollections = new Set<string>();
    const app = buildApp(config, appDeps(rt, (c) => ready || (c !== undefined && readyCollections.has(c))));
    cleanups.push(() => app.close());
    // The index step reports "stops" ready, then is held open, as a large "depots" would hold it.
    let release!: () => void;
    const running = prepare(rt, {
      onReady: (c) => readyCollections.add(c),
      syncIndexes: async (_rt, _collections, onEach) => {
        onEach?.('stops');
        await new Promise<void>((r) => (release = r));
      },
    }).then(() => (ready = true));
    await waitFor(() => readyCollections.has('stops') || null, { what: 'the loaded collection to be marked ready' });
    const search = (collection: string) => app.inject({ method: 'POST', url: '/v1/search', payload: { query: 'step-free tram stop', collection } });
    const stops = await search('stops');
    expect(stops.statusCode, stops.body).toBe(200);
    expect(stops.json().results.length).toBeGreaterThan(0);
    const depots = await search('depots');
    expect(depots.statusCode).toBe(503);
    expect(depots.json().error.code).toBe('SB_ERR_NOT_READY');
    expect((await app.inject({ method: 'GET', url: '/ready' })).statusCode).toBe(503);
    release();
    await withDeadline(running, { what: 'start-up to finish once its index step is released', timeoutMs: 20_000 });
    expect((await search('depots')).statusCode).toBe(200);
  });

  it('rebuilds a missing index file in the index thread, so the request thread only loads the saved file', async () => {
    const { rt, dataDir } = await storeWithDocuments();
    const { indexDir } = storePaths(dataDir);
    rt.indexes.close();
    for (const f of readdirSync(indexDir)) rmSync(path.join(indexDir, f));
    await withDeadline(syncIndexesInThread(rt, ['stops']), { what: 'the index thread to finish', timeoutMs: 30_000 });
    const meta = JSON.parse(readFileSync(path.join(indexDir, 'stops.meta.json'), 'utf8')) as { generation: number; file: string };
    expect(meta.generation).toBe(rt.repo.collectionState('stops')!.generation);
    expect(existsSync(path.join(indexDir, meta.file))).toBe(true);
    const chunks = rt.repo.chunksOfCollection('stops').length;
    // Loaded from the thread's file: nothing added, removed or rebuilt on the request thread.
    expect(rt.indexes.sync('stops')).toMatchObject({ added: 0, removed: 0, rebuilt: false, loaded: true, size: chunks });
  });
});
