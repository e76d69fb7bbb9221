// A full re-index: every file of the collection's folders is processed into a shadow collection while queries
// keep using the collection as it is; then the shadow's vector index is saved under the collection's name and
// one transaction swaps the documents in. A run killed before the swap leaves the shadow behind, and the next
// run goes on from it (what the shadow already holds counts as unchanged there).
//
// The steps, in order:
//   1. build    two passes over the folders into the shadow: the build, then a catch-up pass that costs one
//               hash per file and takes in what changed while the build ran (an upload, an edited file);
//   2. prune    shadow documents from folders that are no longer sources are dropped;
//   3. plan     decide, document by document, what the swap does (planSwap, below: a pure function);
//   4. adopt    save the vector index of the planned result under the collection's name, at the next generation;
//   5. swap     in one transaction: plan again (a writer may have changed the collection meanwhile), apply it,
//               set the collection's generation, drop the shadow.

import { existsSync } from 'node:fs';
import path from 'node:path';
import type { Embedder } from '../embed/types.js';
import type { Logger } from '../logger.js';
import { round3 } from '../numbers.js';
import { shadowCollectionName, type DocumentKey, type Repository, type VectorIndexes } from '../store/index.js';
import { documentId } from './files.js';
import { emptySummary, type IngestSummary } from './summary.js';

/** What the swap does with each document. */
export interface SwapPlan {
  /** Shadow documents that take the place of the collection's copy (or are new to it). */
  moves: DocumentKey[];
  /** Documents of the collection that stay as they are. */
  keep: DocumentKey[];
  /** Documents of the collection that go: replaced by a move, renamed, or gone from their folder. */
  drop: DocumentKey[];
  /** Shadow documents that are not swapped in: their file went away, or the collection's copy is newer. */
  stale: DocumentKey[];
  counts: { added: number; updated: number; renamed: number; removed: number };
}

export interface SwapInput {
  /** The shadow collection's documents after the build. */
  built: readonly DocumentKey[];
  /** The collection's documents as they are now. */
  live: readonly DocumentKey[];
  /** Whether a document's file is still in its folder. */
  fileExists: (d: DocumentKey) => boolean;
  /** The folders the build walked (resolved paths). */
  walked: ReadonlySet<string>;
  /** Whether the build could not read this document's file. */
  failedInBuild: (d: DocumentKey) => boolean;
  /** When the catch-up pass started: a document of the collection changed since then is newer than the shadow's. */
  catchUpFrom: string;
  /** The settings of this run: a document made with others is out of date. */
  settingsKey: string;
}

/** Decides the swap from the shadow's and the collection's documents. */
export function planSwap(input: SwapInput): SwapPlan {
  const { built, live, settingsKey } = input;
  const present = built.filter((d) => input.fileExists(d));
  const vanished = built.filter((d) => !input.fileExists(d));
  // Changed in the collection after the catch-up pass looked (an upload job in the server): newer than the
  // shadow's copy, so the shadow's copy is not swapped in.
  const newerInCollection = new Set(live.filter((d) => d.updatedAt >= input.catchUpFrom && d.settingsKey === settingsKey).map((d) => d.source));
  const moves = present.filter((d) => !newerInCollection.has(d.source));
  const moving = new Set(moves.map((d) => d.source));

  // A document of the collection that no move replaces stays when the build had no say over it.
  const staysAsIs = (d: DocumentKey): boolean =>
    newerInCollection.has(d.source) ||
    // Not from a folder (text sent through the API), or from a folder this run did not walk.
    d.root === null ||
    !input.walked.has(d.root) ||
    // Unreadable now: what was indexed stays, as in an incremental run, while its settings still hold.
    (input.failedInBuild(d) && d.settingsKey === settingsKey);
  const keep = live.filter((d) => !moving.has(d.source) && staysAsIs(d));
  const kept = new Set(keep.map((d) => d.id));
  const drop = live.filter((d) => !kept.has(d.id));

  const stale = [...vanished, ...present.filter((d) => newerInCollection.has(d.source))];
  return { moves, keep, drop, stale, counts: countOutcomes(moves, drop, moving) };
}

/**
 * How the swap reads as an incremental run would report it: a move onto a dropped document of the same source is
 * an update, a move with the bytes of a dropped document no move replaces is a rename, any other move an addition;
 * the remaining drops are removals.
 */
function countOutcomes(moves: readonly DocumentKey[], drop: readonly DocumentKey[], moving: ReadonlySet<string>): SwapPlan['counts'] {
  const dropBySource = new Map(drop.map((d) => [d.source, d] as const));
  const renameable = new Map<string, DocumentKey[]>();
  for (const d of drop) if (!moving.has(d.source)) renameable.set(d.contentHash, [...(renameable.get(d.contentHash) ?? []), d]);
  const counts = { added: 0, updated: 0, renamed: 0, removed: 0 };
  for (const d of moves) {
    if (dropBySource.has(d.source)) counts.updated++;
    else if (renameable.get(d.contentHash)?.shift()) counts.renamed++;
    else counts.added++;
  }
  counts.removed = drop.length - counts.updated - counts.renamed;
  return counts;
}

export interface FullReindexDeps {
  repo: Repository;
  indexes: VectorIndexes;
  embedder: Pick<Embedder, 'id' | 'dimensions'>;
  settingsKey: string;
  logger: Logger;
  /** An incremental ingest of one folder (the pipeline's own), used to build the shadow. */
  ingestPath: (root: string, opts: { collection: string; removeMissing: boolean; remember: boolean; allowEmbedderSwitch: boolean }) => Promise<IngestSummary>;
}

const failureKey = (root: string, source: string): string => `${root}\u0000${source}`;

/** Re-indexes `collection` from `roots` in full, as the header describes. */
export async function rebuildCollection(deps: FullReindexDeps, collection: string, roots: readonly string[], resuming: boolean): Promise<IngestSummary> {
  const { repo, indexes, embedder, settingsKey } = deps;
  const started = performance.now();
  const shadow = shadowCollectionName(collection);
  const log = deps.logger.child({ collection });
  log.info({ roots: roots.length }, resuming ? 'resuming an interrupted full re-index' : 'full re-index: building beside the current index');

  // 1. build
  repo.ensureCollection(shadow);
  const summary = emptySummary();
  const failed = new Set<string>();
  let catchUpFrom = '';
  // Only the last pass's failures count: the first pass's were retried by the second.
  for (let pass = 0; pass < 2; pass++) {
    if (pass === 1) catchUpFrom = new Date().toISOString();
    failed.clear();
    summary.failures = [];
    summary.skipped = [];
    for (const root of roots) {
      const s = await deps.ingestPath(root, { collection: shadow, removeMissing: true, remember: false, allowEmbedderSwitch: true });
      summary.chunks.embedded += s.chunks.embedded;
      summary.chunks.reused += s.chunks.reused;
      summary.failures.push(...s.failures);
      summary.skipped.push(...s.skipped);
      for (const f of s.failures) failed.add(failureKey(path.resolve(root), f.source));
    }
  }

  // 2. prune: built from a folder that has since stopped being a source (or vanished); the collection's copy stays.
  const walked = new Set(roots.map((r) => path.resolve(r)));
  for (const d of repo.documentKeys(shadow)) {
    if (d.root === null || !walked.has(d.root)) repo.deleteDocument(d.id);
  }

  // 3. plan
  const plan = (): SwapPlan =>
    planSwap({
      built: repo.documentKeys(shadow),
      live: repo.documentKeys(collection),
      fileExists: (d) => existsSync(path.join(d.root!, ...d.source.split('/'))),
      walked,
      failedInBuild: (d) => failed.has(failureKey(d.root!, d.source)),
      catchUpFrom,
      settingsKey,
    });
  const before = plan();

  // 4. adopt: the new index is on disk under the collection's name before the database switches, so readers swap
  // by loading one file. Nothing is awaited from here to the commit: in this process no query runs in between.
  const expected = repo.getCollection(collection)?.generation ?? 0;
  const next = expected + 1;
  const rows = [...repo.chunksOfDocuments(before.moves.map((d) => d.id)), ...repo.chunksOfDocuments(before.keep.map((d) => d.id))].sort((a, b) => a.id - b.id);
  indexes.adopt(shadow, collection, next, rows);

  // 5. swap
  let removedChunks = 0;
  let counts = before.counts;
  try {
    repo.transaction(() => {
      const current = repo.getCollection(collection)?.generation ?? 0;
      const p = plan();
      counts = p.counts;
      for (const d of p.stale) repo.deleteDocument(d.id);
      for (const d of p.drop) removedChunks += repo.deleteDocument(d.id).length;
      for (const d of p.moves) repo.moveDocument(d.id, { id: documentId(collection, d.source), collection, source: d.source, root: d.root });
      // Another writer changed the collection since the index file was saved: a generation the file does not
      // claim, so every reader checks it against the database (and the sync below saves a matching one).
      repo.setCollectionState(collection, {
        embedderId: embedder.id,
        dimensions: embedder.dimensions,
        generation: current === expected ? next : current + 1,
      });
      repo.dropCollection(shadow);
    });
  } catch (err) {
    // The saved file claims a switch that did not happen: drop it, and the old index is rebuilt from the
    // stored vectors on the next query.
    indexes.discard(collection);
    throw err;
  }
  indexes.sync(collection);
  summary.documents.added = counts.added;
  summary.documents.updated = counts.updated;
  summary.documents.renamed = counts.renamed;
  summary.documents.removed = counts.removed;
  summary.documents.failed = summary.failures.length;
  summary.chunks.removed = removedChunks;
  summary.seconds = round3((performance.now() - started) / 1000);
  log.info({ documents: summary.documents, chunks: summary.chunks, seconds: summary.seconds }, 'full re-index switched in');
  return summary;
}
