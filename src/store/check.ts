// `sourcebound check`: the database's own consistency checks, the vector index files against the database,
// and files under the data folder that nothing points to. Reads only: it reports, and changes nothing.

import { createHash } from 'node:crypto';
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import hnswlib from 'hnswlib-node';
import { fileSafe } from './hnsw-files.js';
import { createOriginals } from './originals.js';
import { storePaths } from './paths.js';
import { shadowCollectionName, type Store } from './types.js';

const { HierarchicalNSW } = hnswlib;

export interface CheckProblem {
  /** Which check found it. */
  check: 'database' | 'full-text index' | 'vector index' | 'orphan file';
  message: string;
  /** The file it is about, when it is about one. */
  path?: string;
}

export interface CheckReport {
  ok: boolean;
  problems: CheckProblem[];
  /** Things worth knowing that are not problems (an index that start-up will bring up to date). */
  notes: string[];
  checked: { collections: number; indexFiles: number; originals: number; uploads: number };
}

interface MetaFile {
  embedderId?: string;
  dimensions?: number;
  generation?: number;
  file?: string;
  deleted?: number[];
}

export function checkStore(store: Store, dataDir: string): CheckReport {
  const problems: CheckProblem[] = [];
  const notes: string[] = [];
  const paths = storePaths(dataDir);

  const integrity = store.integrity();
  for (const line of integrity.sqlite) problems.push({ check: 'database', message: `SQLite integrity_check: ${line}` });
  if (integrity.fts) problems.push({ check: 'full-text index', message: `FTS5 integrity-check failed: ${integrity.fts}` });

  // ---- vector index files against the database ----
  const collections = store.listCollections();
  const names = new Set<string>();
  for (const c of collections) {
    names.add(c.name);
    // The shadow of a full re-index that was interrupted: the next re-index goes on from it.
    const shadow = shadowCollectionName(c.name);
    if (store.collectionState(shadow)) {
      names.add(shadow);
      notes.push(`collection ${c.name}: an interrupted full re-index left its shadow; the next \`reindex\` goes on from it`);
    }
  }
  const referenced = new Set<string>();
  let indexFiles = 0;
  for (const name of names) {
    const state = store.collectionState(name);
    const chunks = store.chunksOfCollection(name).length;
    const metaPath = path.join(paths.indexDir, `${fileSafe(name)}.meta.json`);
    if (!existsSync(metaPath)) {
      if (chunks > 0) problems.push({ check: 'vector index', message: `collection ${name} has ${chunks} chunks but no index file`, path: metaPath });
      continue;
    }
    referenced.add(path.basename(metaPath));
    let meta: MetaFile;
    try {
      meta = JSON.parse(readFileSync(metaPath, 'utf8')) as MetaFile;
    } catch (err) {
      problems.push({ check: 'vector index', message: `collection ${name}: index description unreadable (${(err as Error).message})`, path: metaPath });
      continue;
    }
    const file = meta.file ? path.join(paths.indexDir, meta.file) : null;
    if (file) referenced.add(path.basename(file));
    if (!file || !existsSync(file)) {
      problems.push({ check: 'vector index', message: `collection ${name}: its index file is missing`, path: file ?? metaPath });
      continue;
    }
    indexFiles++;
    const generation = state?.generation ?? 0;
    const held = meta.generation ?? -1;
    if (held > generation) {
      problems.push({ check: 'vector index', message: `collection ${name}: the index holds generation ${held}, ahead of the database's ${generation}`, path: file });
      continue;
    }
    if (meta.embedderId !== state?.embedderId) {
      notes.push(`collection ${name}: the index was built with embedder ${meta.embedderId}; start-up rebuilds it for ${state?.embedderId}`);
      continue;
    }
    if (held < generation) {
      notes.push(`collection ${name}: the index holds generation ${held} of ${generation}; the next start or query brings it up to date`);
      continue;
    }
    try {
      const index = new HierarchicalNSW('ip', meta.dimensions ?? 0);
      index.readIndexSync(file);
      const deleted = new Set(meta.deleted ?? []);
      const live = index.getIdsList().filter((id) => !deleted.has(id)).length;
      if (live !== chunks) problems.push({ check: 'vector index', message: `collection ${name}: the index holds ${live} vectors, the database ${chunks} chunks, at the same generation`, path: file });
    } catch (err) {
      problems.push({ check: 'vector index', message: `collection ${name}: the index file is unreadable (${(err as Error).message})`, path: file });
    }
  }
  if (existsSync(paths.indexDir)) {
    for (const f of readdirSync(paths.indexDir)) {
      if (referenced.has(f)) continue;
      problems.push({ check: 'orphan file', message: f.includes('.tmp-') ? 'an index save that was interrupted left this file' : 'an index file no collection points to', path: path.join(paths.indexDir, f) });
    }
  }

  // ---- originals kept by hash, and uploads, that no document (nor a queued upload) points to ----
  const originals = createOriginals(paths.originalsDir).list();
  for (const o of originals) {
    if (store.findDocumentByContent(o.collection, o.hash) || store.jobs.activeUpload(o.collection, o.hash)) continue;
    problems.push({ check: 'orphan file', message: `a kept original no document of collection ${o.collection} has`, path: o.file });
  }
  let uploads = 0;
  const uploadsDir = path.join(dataDir, 'uploads');
  for (const c of existsSync(uploadsDir) ? readdirSync(uploadsDir) : []) {
    const dir = path.join(uploadsDir, c);
    if (!statSync(dir).isDirectory()) continue;
    for (const n of readdirSync(dir)) {
      uploads++;
      const file = path.join(dir, n);
      if (n.startsWith('.incoming-')) {
        problems.push({ check: 'orphan file', message: 'an upload that was never completed (the next `serve` removes it)', path: file });
        continue;
      }
      if (store.getDocumentBySource(c, n)) continue;
      const pending = store.jobs.activeUpload(c, createHash('sha256').update(readFileSync(file)).digest('hex'));
      if (pending && (pending.payload as { source?: string }).source === n) continue;
      problems.push({ check: 'orphan file', message: `an upload of collection ${c} that no document comes from`, path: file });
    }
  }
  return { ok: problems.length === 0, problems, notes, checked: { collections: collections.length, indexFiles, originals: originals.length, uploads } };
}
