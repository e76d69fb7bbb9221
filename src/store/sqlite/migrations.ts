// Versioned schema. Each entry runs once, in order, inside a transaction; PRAGMA user_version
// records how far a database has come. Never edit a shipped migration: add a new one.
// An entry is SQL, or a function for a step SQL cannot express (one that needs ftsColumns, say).

import type Database from 'better-sqlite3';
import { ftsColumns } from '../fts-columns.js';
import { SHADOW_PREFIX } from '../types.js';

export type Migration = string | ((db: Database.Database) => void);

/** Runs one migration's statements (the caller holds the transaction and records the version). */
export function runMigration(db: Database.Database, m: Migration): void {
  if (typeof m === 'string') db.exec(m);
  else m(db);
}

/** How many chunks migration 6 reads at a time (a statement cannot write while another still reads). */
const REFILL_BATCH = 2000;

export const MIGRATIONS: readonly Migration[] = [
  // 1: the initial schema
  `
  CREATE TABLE collections (
    name TEXT PRIMARY KEY,
    embedder_id TEXT,
    dimensions INTEGER,
    -- bumped on every change to the collection's chunks; index files record the generation they hold
    generation INTEGER NOT NULL DEFAULT 0,
    created_at TEXT NOT NULL
  );

  -- folders a collection was ingested from, walked again by \`sourcebound reindex\`
  CREATE TABLE sources (
    collection TEXT NOT NULL REFERENCES collections(name) ON DELETE CASCADE,
    root TEXT NOT NULL,
    added_at TEXT NOT NULL,
    PRIMARY KEY (collection, root)
  );

  CREATE TABLE documents (
    id TEXT PRIMARY KEY,
    collection TEXT NOT NULL REFERENCES collections(name) ON DELETE CASCADE,
    source TEXT NOT NULL,
    root TEXT,
    title TEXT NOT NULL,
    format TEXT NOT NULL,
    content_hash TEXT NOT NULL,
    byte_size INTEGER NOT NULL,
    page_count INTEGER,
    effective_date TEXT,
    metadata TEXT NOT NULL DEFAULT '{}',
    text TEXT NOT NULL,
    -- embedder id + chunker settings the chunks were made with; a change re-processes the document
    settings_key TEXT NOT NULL,
    created_at TEXT NOT NULL,
    updated_at TEXT NOT NULL,
    UNIQUE (collection, source)
  );

  -- AUTOINCREMENT: chunk ids are HNSW labels, so an id is never handed out twice
  CREATE TABLE chunks (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    document_id TEXT NOT NULL REFERENCES documents(id) ON DELETE CASCADE,
    ordinal INTEGER NOT NULL,
    text TEXT NOT NULL,
    start_offset INTEGER NOT NULL,
    end_offset INTEGER NOT NULL,
    heading_path TEXT NOT NULL DEFAULT '[]',
    page_start INTEGER,
    page_end INTEGER,
    token_count INTEGER NOT NULL,
    -- sha256 of the text that was embedded (heading path + chunk text): the vector cache key
    chunk_hash TEXT NOT NULL
  );
  CREATE INDEX chunks_by_document ON chunks(document_id, ordinal);

  -- BM25 over three fields; rowid = chunks.id. Contentless: the text lives in chunks.
  CREATE VIRTUAL TABLE chunks_fts USING fts5(
    title, heading, body,
    content='', contentless_delete=1,
    tokenize='porter unicode61 remove_diacritics 2'
  );

  CREATE TABLE vectors (
    model_id TEXT NOT NULL,
    chunk_hash TEXT NOT NULL,
    dimensions INTEGER NOT NULL,
    vector BLOB NOT NULL,
    PRIMARY KEY (model_id, chunk_hash)
  ) WITHOUT ROWID;

  CREATE TABLE jobs (
    id TEXT PRIMARY KEY,
    kind TEXT NOT NULL,
    collection TEXT,
    state TEXT NOT NULL CHECK (state IN ('queued', 'running', 'succeeded', 'failed')),
    attempts INTEGER NOT NULL DEFAULT 0,
    payload TEXT NOT NULL DEFAULT '{}',
    result TEXT,
    error TEXT,
    created_at TEXT NOT NULL,
    started_at TEXT,
    finished_at TEXT
  );
  CREATE INDEX jobs_by_state ON jobs(state, created_at);
  `,
  // 2: re-fill the FTS columns without repeating the title (see ftsColumns in fts-columns.ts). SQL cannot run
  // that function, so this covers the shape every loader produces: the path's first heading dropped when it
  // is the title, and the chunk's own heading line (the path's last entry) cut from the start of the body.
  // Chunks written from now on go through ftsColumns itself.
  `
  INSERT INTO chunks_fts(chunks_fts) VALUES ('delete-all');
  INSERT INTO chunks_fts (rowid, title, heading, body)
  SELECT k.id, trim(d.title),
    coalesce((SELECT group_concat(trim(j.value), ' > ') FROM json_each(k.heading_path) j
              WHERE trim(j.value) <> '' AND trim(j.value) <> trim(d.title)), ''),
    CASE
      WHEN json_array_length(k.heading_path) > 0
        AND substr(k.text, 1, length(json_extract(k.heading_path, '$[#-1]')) + 1) = json_extract(k.heading_path, '$[#-1]') || char(10)
      THEN ltrim(substr(k.text, length(json_extract(k.heading_path, '$[#-1]')) + 1), char(10))
      ELSE k.text
    END
  FROM chunks k JOIN documents d ON d.id = k.document_id;
  `,
  // 3: staff ratings of answers from the reference desk (src/feedback); kept when a collection goes,
  // because they are the raw material of question sets (`sourcebound feedback export`).
  `
  CREATE TABLE answer_ratings (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    collection TEXT NOT NULL,
    key_id TEXT,
    question TEXT NOT NULL,
    -- the question as the service answered it, when a follow-up was rewritten
    answered_question TEXT,
    history TEXT NOT NULL DEFAULT '[]',
    answer TEXT NOT NULL,
    abstained INTEGER NOT NULL CHECK (abstained IN (0, 1)),
    sources TEXT NOT NULL DEFAULT '[]',
    helpful INTEGER NOT NULL CHECK (helpful IN (0, 1)),
    comment TEXT,
    created_at TEXT NOT NULL
  );
  CREATE INDEX answer_ratings_by_collection ON answer_ratings(collection, created_at);
  `,
  // 4: where pages begin inside a chunk that crosses a page break, as a JSON array of [document offset, page],
  // so a citation names the page its quote is printed on. NULL when the chunk sits on one page, and for
  // chunks stored before this column: those are cited on page_start until the document is re-processed
  // (the pipeline version changed with this migration, so the next re-index does that).
  `
  ALTER TABLE chunks ADD COLUMN page_breaks TEXT;
  `,
  // 5: the process that holds a running job (its lease), so that a job whose process is gone can be told from
  // one still running in another process (a CLI ingest beside the server). NULL for rows written before.
  `
  ALTER TABLE jobs ADD COLUMN owner_pid INTEGER;
  ALTER TABLE jobs ADD COLUMN owner_host TEXT;
  `,
  // 6: the lexical index becomes an FTS5 table that keeps its own copy of each row's three fields (a regular
  // content table) instead of a contentless one with contentless_delete=1. Deleting from the contentless table
  // removed the row's postings and length but not its share of the averages record (row count and token
  // totals), which FTS5's bm25() and the in-memory engine both read as N and avgdl: every update, deletion and
  // full re-index inflated them (docs/architecture.md, "Lexical statistics"). A regular table deletes a row
  // from its stored fields, so the averages record always counts exactly the rows present. The rows are
  // rebuilt here from the chunks with ftsColumns, as a fresh ingest writes them; chunks of a shadow collection
  // (a full re-index under way) stay out of the index until they are swapped in, as before.
  (db) => {
    db.exec(`
      DROP TABLE chunks_fts;
      CREATE VIRTUAL TABLE chunks_fts USING fts5(
        title, heading, body,
        tokenize='porter unicode61 remove_diacritics 2'
      );
    `);
    const read = db.prepare(`
      SELECT k.id, d.title, k.heading_path, k.text FROM chunks k JOIN documents d ON d.id = k.document_id
      WHERE k.id > ? AND substr(d.collection, 1, ${SHADOW_PREFIX.length}) <> ? ORDER BY k.id LIMIT ${REFILL_BATCH}`);
    const insert = db.prepare('INSERT INTO chunks_fts (rowid, title, heading, body) VALUES (?, ?, ?, ?)');
    for (let after = 0; ; ) {
      const rows = read.raw().all(after, SHADOW_PREFIX) as [number, string, string, string][];
      for (const [id, title, headingPath, text] of rows) {
        const cols = ftsColumns(title, JSON.parse(headingPath) as string[], text);
        insert.run(id, cols.title, cols.heading, cols.body);
      }
      if (rows.length < REFILL_BATCH) break;
      after = rows[rows.length - 1]![0];
    }
  },
  // 7: leases instead of process ids. A process id says nothing once the process is gone and the id is reused,
  // and nothing at all about a process on another host; a lease does: its holder renews it (a heartbeat) and a
  // lease not renewed by `lease_expires_at` counts as abandoned. Running jobs carry their holder's lease; the
  // re-index lock becomes a named lease in `leases` (it was a file in the data folder). NULL lease columns are
  // rows written before: those are judged by their process id as before.
  `
  ALTER TABLE jobs ADD COLUMN lease_holder TEXT;
  ALTER TABLE jobs ADD COLUMN heartbeat_at TEXT;
  ALTER TABLE jobs ADD COLUMN lease_expires_at TEXT;
  CREATE TABLE leases (
    name TEXT PRIMARY KEY,
    holder TEXT NOT NULL,
    pid INTEGER NOT NULL,
    host TEXT NOT NULL,
    acquired_at TEXT NOT NULL,
    heartbeat_at TEXT NOT NULL,
    expires_at TEXT NOT NULL
  );
  `,
  // 8: what the query path and the collection list read without scanning. Each collection keeps its document
  // and chunk counts, updated in the transaction of every change (src/store/sqlite/corpus.ts), so /metrics and
  // /v1/collections no longer count the chunks with a join on each call. Document metadata is also kept as
  // key-value rows with an index, so a metadata filter finds its documents by lookup instead of running
  // json_extract over every document of the collection; only text values are kept, the only ones a filter (a
  // string) could ever equal. And an index on content hashes, which every upload looks up.
  `
  ALTER TABLE collections ADD COLUMN document_count INTEGER NOT NULL DEFAULT 0;
  ALTER TABLE collections ADD COLUMN chunk_count INTEGER NOT NULL DEFAULT 0;
  UPDATE collections SET
    document_count = (SELECT count(*) FROM documents d WHERE d.collection = collections.name),
    chunk_count = (SELECT count(*) FROM chunks k JOIN documents d ON d.id = k.document_id WHERE d.collection = collections.name);

  CREATE TABLE document_metadata (
    document_id TEXT NOT NULL REFERENCES documents(id) ON DELETE CASCADE,
    collection TEXT NOT NULL,
    key TEXT NOT NULL,
    value TEXT NOT NULL,
    PRIMARY KEY (document_id, key)
  ) WITHOUT ROWID;
  CREATE INDEX document_metadata_by_value ON document_metadata(collection, key, value, document_id);
  INSERT INTO document_metadata (document_id, collection, key, value)
  SELECT d.id, d.collection, j.key, j.value FROM documents d, json_each(d.metadata) j WHERE j.type = 'text';

  CREATE INDEX documents_by_content ON documents(collection, content_hash);
  `,
  // 9: the lexical change log. Every chunk row inserted, deleted or moved to another document appends its id, so an
  // in-memory copy of the lexical index (src/retrieve/lexical-memory.ts) can follow the database by re-reading just
  // those rows, in this process or another (a CLI ingest, the job thread), instead of rebuilding whole. Triggers
  // on chunks rather than code in the writers: every path that changes a chunk is logged, a cascade included.
  // AUTOINCREMENT so a position in the log is never handed out twice, even after old entries are pruned.
  `
  CREATE TABLE lexical_log (
    seq INTEGER PRIMARY KEY AUTOINCREMENT,
    chunk_id INTEGER NOT NULL
  );
  CREATE TRIGGER lexical_log_chunk_insert AFTER INSERT ON chunks BEGIN
    INSERT INTO lexical_log (chunk_id) VALUES (new.id);
  END;
  CREATE TRIGGER lexical_log_chunk_delete AFTER DELETE ON chunks BEGIN
    INSERT INTO lexical_log (chunk_id) VALUES (old.id);
  END;
  CREATE TRIGGER lexical_log_chunk_move AFTER UPDATE OF document_id ON chunks BEGIN
    INSERT INTO lexical_log (chunk_id) VALUES (new.id);
  END;
  `,
  // 10: a node that follows a PostgreSQL system of record keeps its copy here (src/store/sqlite/replica.ts): which
  // database it follows and how far into its change log it has applied, and each copied document's version there,
  // written in the transaction of the copy itself. An embedded store leaves both empty.
  `
  CREATE TABLE follow_state (
    key TEXT PRIMARY KEY,
    value TEXT NOT NULL
  );
  CREATE TABLE follow_documents (
    document_id TEXT PRIMARY KEY REFERENCES documents(id) ON DELETE CASCADE,
    version INTEGER NOT NULL
  );
  `,
];
