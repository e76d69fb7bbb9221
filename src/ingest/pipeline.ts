import { createHash } from 'node:crypto';
import { readFile, stat } from 'node:fs/promises';
import path from 'node:path';
import type { Embedder } from '../embed/types.js';
import { SourceboundError } from '../errors.js';
import type { Logger } from '../logger.js';
import { round3 } from '../numbers.js';
import { shadowCollectionName, type ChunkInput, type DocumentKey, type Repository, type VectorIndexes } from '../store/index.js';
import type { ChunkDraft, LoadedDocument } from '../types.js';
import { chunkDocument } from './chunk.js';
import { detectFormat } from './detect.js';
import { documentId, walk } from './files.js';
import { rebuildCollection } from './full-reindex.js';
import { loadDocument } from './load.js';
import type { PdfLimits } from './load-pdf.js';
import { refusedBySize } from './size-check.js';
import { checkDistinctWords, DEFAULT_DOCUMENT_LIMITS, LimitExceeded, NO_DEADLINE, startDeadline, type Deadline, type DocumentLimits } from './budget.js';
import { buildNormalisedDocument } from './normalise.js';
import { addInto, emptySummary, fail, type FileOutcome, type IngestSummary } from './summary.js';
import { embedAndStore, storedVectors, VECTOR_BATCH } from './vectors.js';

export type { FileOutcome, IngestSummary };

export interface IngestOptions {
  targetTokens: number;
  maxTokens: number;
  overlapTokens: number;
  documentMaxBytes: number;
  /** Page and time bounds on one PDF (defaults: load-pdf.ts). */
  pdf?: PdfLimits;
  /** Bounds on the work one document may cause (defaults: budget.ts). */
  limits?: DocumentLimits;
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
  /** Vectors made, stored and indexed at a time (VECTOR_BATCH); tests set it small. */
  vectorBatch?: number;
  onProgress?: (p: IngestProgress) => void;
}): Ingestor {
  const { repo, indexes, embedder, options, logger } = deps;
  const limits = options.limits ?? DEFAULT_DOCUMENT_LIMITS;
  const batchSize = deps.batchSize ?? 32;
  const vectorBatch = Math.max(1, deps.vectorBatch ?? VECTOR_BATCH);
  // Leave room for the heading path that is prepended before embedding, and for [CLS]/[SEP].
  const maxTokens = Math.max(16, Math.min(options.maxTokens, embedder.maxTokens - 40));
  const targetTokens = Math.min(options.targetTokens, maxTokens);
  const settingsKey = `${embedder.id}|chunk:${targetTokens}/${maxTokens}/${options.overlapTokens}|pipeline:${PIPELINE_VERSION}`;

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
    const tooLong = await refusedBySize(file, info.size, limits);
    if (tooLong) return fail(summary, source, tooLong);
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
    // The parse budget starts with the file's bytes in hand and runs until its chunks are made.
    const deadline = startDeadline(limits.parseMaxSeconds);
    try {
      loaded = await loadDocument(bytes, path.basename(file), { ...(options.pdf ? { pdf: options.pdf } : {}), limits, deadline });
    } catch (err) {
      return fail(summary, source, (err as Error).message);
    }
    const meta = { collection, source, root, contentHash, byteSize: bytes.length, existing: existing !== null };
    return indexLoaded(loaded, meta, summary, progress, log, deadline);
  };

  const indexLoaded = async (
    loaded: LoadedDocument,
    meta: { collection: string; source: string; root: string | null; contentHash: string; byteSize: number; existing: boolean },
    summary: IngestSummary,
    progress: IngestProgress,
    log: Logger,
    deadline: Deadline = NO_DEADLINE,
  ): Promise<FileOutcome> => {
    const { collection, source, root, contentHash } = meta;
    trailTokens.clear();
    const normalised = buildNormalisedDocument(loaded.blocks);
    if (normalised.text.trim().length === 0) return fail(summary, source, 'no text found in the document');
    let drafts: ChunkDraft[];
    try {
      checkDistinctWords(normalised.text, limits);
      drafts = chunkDocument(normalised, {
        targetTokens,
        maxTokens,
        overlapTokens: options.overlapTokens,
        countTokens: (t) => embedder.countTokens(t),
        maxChunks: limits.maxChunks,
        deadline,
      });
    } catch (err) {
      // Over a limit: nothing of the document was embedded or stored.
      if (err instanceof LimitExceeded) return fail(summary, source, err.message);
      throw err;
    }
    const chunks: ChunkInput[] = drafts.map((c) => {
      const text = embedText(loaded.title, c);
      return { ...c, chunkHash: createHash('sha256').update(text).digest('hex') };
    });
    const embedded = await embedAndStore(repo, embedder, chunks.map((c) => c.chunkHash), (i) => embedText(loaded.title, drafts[i]!), {
      embedBatch: batchSize,
      vectorBatch,
    });
    summary.chunks.embedded += embedded;
    summary.chunks.reused += chunks.length - embedded;
    const docId = documentId(collection, source);
    const { removedChunkIds, chunkIds, generation } = repo.replaceDocument(
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
      new Map(),
      embedder.id,
    );
    // The vector index learns the change from the write itself, in place, reading the vectors back a batch at a
    // time; the sync at the end saves it.
    indexes.apply(collection, { generation, removed: removedChunkIds, added: storedVectors(repo, embedder.id, chunkIds, vectorBatch) });
    summary.chunks.removed += removedChunkIds.length;
    progress.pages += loaded.pageCount ?? 0;
    progress.chunks += chunks.length;
    log.debug({ chunks: chunks.length, embedded }, meta.existing ? 'document updated' : 'document added');
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
          const removed = repo.deleteDocument(doc.id);
          const generation = repo.collectionState(opts.collection)?.generation;
          if (generation !== undefined) indexes.apply(opts.collection, { generation, removed, added: [] });
          summary.chunks.removed += removed.length;
          summary.documents.removed++;
        }
      }
    }
    for (const f of summary.failures) logger.warn({ source: f.source, reason: f.reason }, 'document not ingested');
    // Nothing added, changed or removed (a rename keeps its chunk ids): the vector index has nothing to learn,
    // and loading it just to find that out would be most of an unchanged re-index's time. Unless the saved
    // index is behind (a run killed after its last document was stored, before the index was saved): its
    // description file says so without loading it.
    const d = summary.documents;
    const behind = (): boolean => indexes.savedGeneration(opts.collection) !== (repo.collectionState(opts.collection)?.generation ?? 0);
    if (d.added + d.updated + d.removed > 0 || behind()) indexes.sync(opts.collection);
    summary.seconds = round3((performance.now() - started) / 1000);
    return summary;
  };

  /** A new embedder, or documents of the walked folders made with other chunker settings. */
  const settingsChanged = (collection: string, roots: readonly string[]): boolean => {
    const col = repo.getCollection(collection);
    if (col?.embedderId && col.embedderId !== embedder.id) return true;
    const walked = new Set(roots);
    return repo.documentKeys(collection).some((d) => d.root !== null && walked.has(d.root) && d.settingsKey !== settingsKey);
  };

  const rebuild = (collection: string, roots: readonly string[], resuming: boolean): Promise<IngestSummary> =>
    rebuildCollection({ repo, indexes, embedder, settingsKey, logger, ingestPath }, collection, roots, resuming);

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
      summary.seconds = round3((performance.now() - started) / 1000);
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
      total.seconds = round3((performance.now() - started) / 1000);
      return total;
    },
  };
}
