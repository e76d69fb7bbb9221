import { createHash } from 'node:crypto';
import { existsSync } from 'node:fs';
import { readdir, readFile, stat } from 'node:fs/promises';
import path from 'node:path';
import type { Embedder } from '../embed/types.js';
import { SourceboundError } from '../errors.js';
import type { Logger } from '../logger.js';
import { shadowCollectionName, type ChunkInput, type DocumentKey, type Repository, type VectorIndexes } from '../store/index.js';
import type { ChunkDraft, LoadedDocument } from '../types.js';
import { chunkDocument } from './chunk.js';
import { detectFormat } from './detect.js';
import { loadDocument } from './load.js';
import type { PdfLimits } from './load-pdf.js';
import { buildNormalisedDocument } from './normalise.js';

export interface IngestOptions {
  targetTokens: number;
  maxTokens: number;
  overlapTokens: number;
  documentMaxBytes: number;
  /** Page and time bounds on one PDF (defaults: load-pdf.ts). */
  pdf?: PdfLimits;
}

export type FileOutcome = 'added' | 'updated' | 'renamed' | 'unchanged' | 'failed' | 'skipped';

export interface IngestSummary {
  documents: { added: number; updated: number; renamed: number; removed: number; unchanged: number; failed: number };
  chunks: { embedded: number; reused: number; removed: number };
  failures: { source: string; reason: string }[];
  skipped: string[];
  seconds: number;
}

export interface IngestProgress {
  filesDone: number;
  filesTotal: number;
  /** Files that failed so far (each also lands in the summary's failures). */
  failed: number;
  pages: number;
  chunks: number;
  /** The file being worked on, or the last one finished. */
  current: string;
}

export interface Ingestor {
  /** Ingests every supported file under `root` (a folder or one file) into `collection`. */
  ingestPath(
    root: string,
    opts: { collection: string; removeMissing?: boolean; force?: boolean; remember?: boolean; allowEmbedderSwitch?: boolean },
  ): Promise<IngestSummary>;
  /**
   * Walks every remembered folder again: changed files re-processed, renamed ones moved, deleted ones removed.
   * `full` (or changed embedder or chunker settings, or a full re-index that was interrupted) rebuilds the
   * collection in a shadow collection and swaps it in at the end; queries use the old index until then.
   */
  reindex(opts: { collection?: string; full?: boolean }): Promise<IngestSummary>;
  /** Indexes documents that were loaded elsewhere (evaluation corpora, API text uploads). */
  ingestLoaded(
    collection: string,
    docs: Iterable<{ source: string; loaded: LoadedDocument; contentHash: string; byteSize: number }>,
  ): Promise<IngestSummary>;
  /** The settings a document's chunks depend on; a change re-processes it. */
  readonly settingsKey: string;
}

// Extensions looked at in a folder walk; other files are skipped without complaint. A file with no
// extension is looked at too, and its type is decided from its bytes.
const CANDIDATE_EXTENSIONS = new Set(['.pdf', '.docx', '.md', '.markdown', '.html', '.htm', '.txt', '.text', '']);

// [CLS] and [SEP] for BERT-family models; countTokens leaves them out.
const SPECIAL_TOKENS = 2;

// Bump when the loaders or chunker change in a way that changes chunks for the same bytes.
// 2: DOCX support, `version` metadata, table rows and headings recognised in PDFs.
// 3: PDF sub-headings in sentence case, and the offsets where pages begin inside a chunk (page breaks).
const PIPELINE_VERSION = 3;

export function createIngestor(deps: {
  repo: Repository;
  indexes: VectorIndexes;
  embedder: Embedder;
  options: IngestOptions;
  logger: Logger;
  batchSize?: number;
  onProgress?: (p: IngestProgress) => void;
}): Ingestor {
  const { repo, indexes, embedder, options, logger } = deps;
  const batchSize = deps.batchSize ?? 32;
  // Leave room for the heading path that is prepended before embedding, and for [CLS]/[SEP].
  const maxTokens = Math.max(16, Math.min(options.maxTokens, embedder.maxTokens - 40));
  const targetTokens = Math.min(options.targetTokens, maxTokens);
  const settingsKey = `${embedder.id}|chunk:${targetTokens}/${maxTokens}/${options.overlapTokens}|pipeline:${PIPELINE_VERSION}`;

  const emptySummary = (): IngestSummary => ({
    documents: { added: 0, updated: 0, renamed: 0, removed: 0, unchanged: 0, failed: 0 },
    chunks: { embedded: 0, reused: 0, removed: 0 },
    failures: [],
    skipped: [],
    seconds: 0,
  });

  const bindCollection = (collection: string, allowSwitch: boolean): void => {
    repo.ensureCollection(collection);
    const col = repo.getCollection(collection)!;
    if (col.embedderId === embedder.id) return;
    // Vectors of two embedders never share an index: switching is only done by a re-index, which
    // re-processes every document of the collection (their settings key names the embedder).
    if (col.embedderId && !allowSwitch) {
      throw new SourceboundError('SB_ERR_EMBEDDER_MISMATCH', [collection, col.embedderId, embedder.id]);
    }
    repo.setCollectionEmbedder(collection, embedder.id, embedder.dimensions);
  };

  const trailTokens = new Map<string, number>();
  const countTrail = (label: string): number => {
    let n = trailTokens.get(label);
    if (n === undefined) {
      n = embedder.countTokens(label);
      trailTokens.set(label, n);
    }
    return n;
  };
  // The heading trail rides along with the chunk into the embedder. A model truncates what passes
  // its limit, which would cut the chunk's own text, so outer headings give way first.
  const embedText = (title: string, c: ChunkDraft): string => {
    let trail = c.headingPath[0] === title ? c.headingPath : [title, ...c.headingPath];
    const room = embedder.maxTokens - SPECIAL_TOKENS - 1 - c.tokenCount;
    while (trail.length > 0 && countTrail(trail.join(' > ')) > room) trail = trail.slice(1);
    return trail.length > 0 ? `${trail.join(' > ')}\n${c.text}` : c.text;
  };

  const processFile = async (
    file: string,
    source: string,
    root: string,
    collection: string,
    force: boolean,
    summary: IngestSummary,
    progress: IngestProgress,
    renameFrom: (contentHash: string) => DocumentKey | null,
  ): Promise<FileOutcome> => {
    const log = logger.child({ source, collection });
    const info = await stat(file);
    if (info.size > options.documentMaxBytes) {
      return fail(summary, source, `file is ${info.size} bytes, over the limit of ${options.documentMaxBytes}`);
    }
    const bytes = new Uint8Array(await readFile(file));
    const contentHash = createHash('sha256').update(bytes).digest('hex');
    const existing = repo.getDocumentBySource(collection, source);
    if (existing && !force && existing.contentHash === contentHash && existing.settingsKey === settingsKey) {
      summary.documents.unchanged++;
      return 'unchanged';
    }
    const from = existing ? null : renameFrom(contentHash);
    if (from) {
      // Same bytes under a new name, the old name gone: the document moves with its chunks, vectors and FTS
      // rows, and nothing is loaded or embedded. Its id follows the path, as every document id does.
      const moved = repo.moveDocument(from.id, { id: documentId(collection, source), collection, source, root });
      summary.documents.renamed++;
      summary.chunks.reused += moved;
      progress.chunks += moved;
      log.debug({ from: from.source, chunks: moved }, 'document renamed');
      return 'renamed';
    }
    if (bytes.length === 0) return fail(summary, source, 'the file is empty');
    const format = detectFormat(bytes, path.basename(file));
    if (!format) {
      // A known extension with unreadable content is a failure; anything else is simply not a document.
      if (path.extname(file) === '') {
        summary.skipped.push(source);
        return 'skipped';
      }
      return fail(summary, source, 'not a supported document (binary content or unknown type)');
    }
    let loaded;
    try {
      loaded = await loadDocument(bytes, path.basename(file), options.pdf ? { pdf: options.pdf } : {});
    } catch (err) {
      return fail(summary, source, (err as Error).message);
    }
    return indexLoaded(loaded, { collection, source, root, contentHash, byteSize: bytes.length, existing: existing !== null }, summary, progress, log);
  };

  const indexLoaded = async (
    loaded: LoadedDocument,
    meta: { collection: string; source: string; root: string | null; contentHash: string; byteSize: number; existing: boolean },
    summary: IngestSummary,
    progress: IngestProgress,
    log: Logger,
  ): Promise<FileOutcome> => {
    const { collection, source, root, contentHash } = meta;
    trailTokens.clear();
    const normalised = buildNormalisedDocument(loaded.blocks);
    if (normalised.text.trim().length === 0) return fail(summary, source, 'no text found in the document');
    const drafts = chunkDocument(normalised, {
      targetTokens,
      maxTokens,
      overlapTokens: options.overlapTokens,
      countTokens: (t) => embedder.countTokens(t),
    });
    const chunks: ChunkInput[] = drafts.map((c) => {
      const text = embedText(loaded.title, c);
      return { ...c, chunkHash: createHash('sha256').update(text).digest('hex'), embedText: text } as ChunkInput & { embedText: string };
    });
    const vectors = repo.getVectors(embedder.id, chunks.map((c) => c.chunkHash));
    const toEmbed = chunks.filter((c) => !vectors.has(c.chunkHash)) as (ChunkInput & { embedText: string })[];
    const unique = [...new Map(toEmbed.map((c) => [c.chunkHash, c])).values()];
    for (let i = 0; i < unique.length; i += batchSize) {
      const batch = unique.slice(i, i + batchSize);
      const out = await embedder.embed(batch.map((c) => c.embedText));
      batch.forEach((c, j) => vectors.set(c.chunkHash, out[j]!));
    }
    summary.chunks.embedded += unique.length;
    summary.chunks.reused += chunks.length - unique.length;
    const docId = documentId(collection, source);
    const { removedChunkIds } = repo.replaceDocument(
      {
        id: docId,
        collection,
        source,
        root,
        title: loaded.title,
        format: loaded.format,
        contentHash,
        byteSize: meta.byteSize,
        pageCount: loaded.pageCount,
        effectiveDate: loaded.effectiveDate,
        metadata: loaded.metadata,
        text: normalised.text,
        settingsKey,
      },
      chunks.map(({ ordinal, text, start, end, headingPath, pageStart, pageEnd, pageBreaks, tokenCount, chunkHash }) => ({
        ordinal, text, start, end, headingPath, pageStart, pageEnd, pageBreaks, tokenCount, chunkHash,
      })),
      vectors,
      embedder.id,
    );
    summary.chunks.removed += removedChunkIds.length;
    progress.pages += loaded.pageCount ?? 0;
    progress.chunks += chunks.length;
    log.debug({ chunks: chunks.length, embedded: unique.length }, meta.existing ? 'document updated' : 'document added');
    if (meta.existing) summary.documents.updated++;
    else summary.documents.added++;
    return meta.existing ? 'updated' : 'added';
  };

  const ingestPath: Ingestor['ingestPath'] = async (rootArg, opts) => {
    const started = performance.now();
    const summary = emptySummary();
    const root = path.resolve(rootArg);
    const info = await stat(root).catch(() => null);
    if (!info) throw new SourceboundError('SB_ERR_INGEST_FAILED', [rootArg, 'no such file or folder']);
    bindCollection(opts.collection, opts.allowEmbedderSwitch ?? opts.force ?? false);
    const base = info.isDirectory() ? root : path.dirname(root);
    const files = info.isDirectory() ? await walk(root) : [root];
    if (info.isDirectory() && (opts.remember ?? true)) repo.addSourceRoot(opts.collection, root);
    const progress: IngestProgress = { filesDone: 0, filesTotal: files.length, failed: 0, pages: 0, chunks: 0, current: '' };
    const sourceOf = (file: string): string => path.relative(base, file).split(path.sep).join('/');
    // Documents of this folder whose file is gone, by content hash: a new file with the same bytes is a rename.
    // Only a walk that removes what is missing may rename (otherwise the old document would have stayed).
    const vanished = new Map<string, DocumentKey[]>();
    if (opts.removeMissing && info.isDirectory()) {
      const walked = new Set(files.map(sourceOf));
      for (const d of repo.documentKeys(opts.collection)) {
        if (d.root !== base || walked.has(d.source) || d.settingsKey !== settingsKey) continue;
        vanished.set(d.contentHash, [...(vanished.get(d.contentHash) ?? []), d]);
      }
    }
    const renameFrom = (hash: string): DocumentKey | null => vanished.get(hash)?.shift() ?? null;
    const seen = new Set<string>();
    for (const file of files) {
      const source = sourceOf(file);
      seen.add(source);
      progress.current = source;
      // Reported on entry too, so a long PDF shows which file is being worked on.
      deps.onProgress?.(progress);
      try {
        await processFile(file, source, base, opts.collection, opts.force ?? false, summary, progress, renameFrom);
      } catch (err) {
        // One bad file never stops the batch; what was indexed before stays as it was.
        fail(summary, source, (err as Error).message);
        logger.error({ source, err }, 'ingest of one document failed');
      }
      progress.filesDone++;
      progress.failed = summary.documents.failed;
      deps.onProgress?.(progress);
    }
    if (opts.removeMissing && info.isDirectory()) {
      for (const doc of repo.documentKeys(opts.collection)) {
        if (doc.root === base && !seen.has(doc.source)) {
          summary.chunks.removed += repo.deleteDocument(doc.id).length;
          summary.documents.removed++;
        }
      }
    }
    for (const f of summary.failures) logger.warn({ source: f.source, reason: f.reason }, 'document not ingested');
    // Nothing added, changed or removed (a rename keeps its chunk ids): the vector index has nothing to learn,
    // and loading it just to find that out would be most of an unchanged re-index's time.
    const d = summary.documents;
    if (d.added + d.updated + d.removed > 0) indexes.sync(opts.collection);
    summary.seconds = round((performance.now() - started) / 1000);
    return summary;
  };

  /** A new embedder, or documents of the walked folders made with other chunker settings. */
  const settingsChanged = (collection: string, roots: readonly string[]): boolean => {
    const col = repo.getCollection(collection);
    if (col?.embedderId && col.embedderId !== embedder.id) return true;
    const walked = new Set(roots);
    return repo.documentKeys(collection).some((d) => d.root !== null && walked.has(d.root) && d.settingsKey !== settingsKey);
  };

  /**
   * A full re-index: every file of `roots` is processed into a shadow collection while queries keep using the
   * collection as it is; then the shadow's index file is saved under the collection's name and one transaction
   * swaps the documents in. A run killed before the swap leaves the shadow behind, and the next run goes on
   * from it (what it already holds counts as unchanged there).
   */
  const rebuild = async (collection: string, roots: readonly string[], resuming: boolean): Promise<IngestSummary> => {
    const started = performance.now();
    const shadow = shadowCollectionName(collection);
    const log = logger.child({ collection });
    log.info({ roots: roots.length }, resuming ? 'resuming an interrupted full re-index' : 'full re-index: building beside the current index');
    repo.ensureCollection(shadow);
    const summary = emptySummary();
    const failed = new Set<string>();
    let catchUpFrom = '';
    // Two passes: the build, then a catch-up that costs one hash per file and takes in what changed while the
    // build ran (an upload, an edited file). Only the last pass's failures count: the first pass retried them.
    for (let pass = 0; pass < 2; pass++) {
      if (pass === 1) catchUpFrom = new Date().toISOString();
      failed.clear();
      summary.failures = [];
      summary.skipped = [];
      for (const root of roots) {
        const s = await ingestPath(root, { collection: shadow, removeMissing: true, remember: false, allowEmbedderSwitch: true });
        summary.chunks.embedded += s.chunks.embedded;
        summary.chunks.reused += s.chunks.reused;
        summary.failures.push(...s.failures);
        summary.skipped.push(...s.skipped);
        for (const f of s.failures) failed.add(`${path.resolve(root)}\u0000${f.source}`);
      }
    }
    const walked = new Set(roots.map((r) => path.resolve(r)));
    for (const d of repo.documentKeys(shadow)) {
      // Built from a folder that has since stopped being a source (or vanished): the collection's copy stays.
      if (d.root === null || !walked.has(d.root)) repo.deleteDocument(d.id);
    }

    // Which documents of the collection survive the swap, which shadow documents replace them, and how each
    // counts. Run twice: once to save the index file ahead of the switch, once inside the switch itself.
    const plan = () => {
      const present = (d: DocumentKey): boolean => existsSync(path.join(d.root!, ...d.source.split('/')));
      const all = repo.documentKeys(shadow);
      const built = all.filter(present);
      const gone = all.filter((d) => !present(d));
      const old = repo.documentKeys(collection);
      // Changed in the collection after the catch-up pass looked (an upload job in the server): newer than
      // the shadow's copy.
      const newer = new Set(old.filter((d) => d.updatedAt >= catchUpFrom && d.settingsKey === settingsKey).map((d) => d.source));
      const moves = built.filter((d) => !newer.has(d.source));
      const moving = new Set(moves.map((d) => d.source));
      const keep = old.filter(
        (d) =>
          !moving.has(d.source) &&
          (newer.has(d.source) ||
            d.root === null ||
            !walked.has(d.root) ||
            // Unreadable now: what was indexed stays, as in an incremental run, while its settings still hold.
            (failed.has(`${d.root}\u0000${d.source}`) && d.settingsKey === settingsKey)),
      );
      const kept = new Set(keep.map((d) => d.id));
      const drop = old.filter((d) => !kept.has(d.id));
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
      const stale = [...gone, ...built.filter((d) => newer.has(d.source))];
      return { moves, keep, drop, stale, counts };
    };

    const before = plan();
    const expected = repo.getCollection(collection)?.generation ?? 0;
    const next = expected + 1;
    const rows = [
      ...repo.chunksOfDocuments(before.moves.map((d) => d.id)),
      ...repo.chunksOfDocuments(before.keep.map((d) => d.id)),
    ].sort((a, b) => a.id - b.id);
    // The new index is on disk under the collection's name before the database switches, so readers swap by
    // loading one file. Nothing is awaited from here to the commit: in this process no query runs in between.
    indexes.adopt(shadow, collection, next, rows);
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
    summary.seconds = round((performance.now() - started) / 1000);
    log.info({ documents: summary.documents, chunks: summary.chunks, seconds: summary.seconds }, 'full re-index switched in');
    return summary;
  };

  return {
    settingsKey,
    ingestPath,
    async ingestLoaded(collection, docs) {
      const started = performance.now();
      const summary = emptySummary();
      bindCollection(collection, false);
      const progress: IngestProgress = { filesDone: 0, filesTotal: 0, failed: 0, pages: 0, chunks: 0, current: '' };
      for (const d of docs) {
        progress.filesTotal++;
        progress.current = d.source;
        const existing = repo.getDocumentBySource(collection, d.source);
        if (existing && existing.contentHash === d.contentHash && existing.settingsKey === settingsKey) {
          summary.documents.unchanged++;
        } else {
          try {
            await indexLoaded(d.loaded, { collection, source: d.source, root: null, contentHash: d.contentHash, byteSize: d.byteSize, existing: existing !== null }, summary, progress, logger);
          } catch (err) {
            fail(summary, d.source, (err as Error).message);
          }
        }
        progress.filesDone++;
        progress.failed = summary.documents.failed;
        deps.onProgress?.(progress);
      }
      indexes.sync(collection);
      summary.seconds = round((performance.now() - started) / 1000);
      return summary;
    },
    async reindex(opts) {
      const started = performance.now();
      const total = emptySummary();
      const rootsOf = new Map<string, string[]>();
      for (const { collection, root } of repo.listSourceRoots(opts.collection)) {
        rootsOf.set(collection, [...(rootsOf.get(collection) ?? []), root]);
      }
      for (const [collection, all] of rootsOf) {
        const roots: string[] = [];
        for (const root of all) {
          if (await stat(root).catch(() => null)) roots.push(root);
          else logger.warn({ collection, root }, 'source folder is missing; its documents are kept until it returns or is removed');
        }
        const resuming = repo.getCollection(shadowCollectionName(collection)) !== null;
        const changed = settingsChanged(collection, roots);
        let s: IngestSummary;
        if (opts.full || resuming || changed) {
          if (changed && !opts.full) logger.info({ collection }, 'embedder or chunker settings changed since the last run: re-indexing in full');
          s = await rebuild(collection, roots, resuming);
        } else {
          s = emptySummary();
          for (const root of roots) addInto(s, await ingestPath(root, { collection, removeMissing: true, remember: false }));
        }
        addInto(total, s);
      }
      total.seconds = round((performance.now() - started) / 1000);
      return total;
    },
  };
}

function addInto(total: IngestSummary, s: IngestSummary): void {
  for (const k of Object.keys(total.documents) as (keyof IngestSummary['documents'])[]) total.documents[k] += s.documents[k];
  for (const k of Object.keys(total.chunks) as (keyof IngestSummary['chunks'])[]) total.chunks[k] += s.chunks[k];
  total.failures.push(...s.failures);
  total.skipped.push(...s.skipped);
}

/** Stable id of a document: the same collection and source always map to the same id. */
export function documentId(collection: string, source: string): string {
  return createHash('sha256').update(`${collection}\u0000${source}`).digest('hex').slice(0, 24);
}

function fail(summary: IngestSummary, source: string, reason: string): FileOutcome {
  summary.documents.failed++;
  summary.failures.push({ source, reason });
  return 'failed';
}

async function walk(dir: string): Promise<string[]> {
  const out: string[] = [];
  const entries = await readdir(dir, { withFileTypes: true });
  entries.sort((a, b) => (a.name < b.name ? -1 : a.name > b.name ? 1 : 0));
  for (const e of entries) {
    if (e.name.startsWith('.') || e.name === 'node_modules') continue;
    const full = path.join(dir, e.name);
    if (e.isDirectory()) out.push(...(await walk(full)));
    else if (e.isFile() && CANDIDATE_EXTENSIONS.has(path.extname(e.name).toLowerCase())) out.push(full);
  }
  return out;
}

function round(x: number): number {
  return Math.round(x * 1000) / 1000;
}
