-- emend store schema, version 4 (PRAGMA user_version = 4).
-- Objects (chunk, blob, blob_chunk, commit_log) are append-only: triggers refuse updates and
-- deletes. Index tables (mark, version_index, extract_index, tag, row_map) are derived from commit
-- bodies (and extracts) inside the same transaction as the commit, and `verify` checks them.
-- Cell edits have no index table: they are read from the bodies, where they are packed.

CREATE TABLE store_meta (
    name  TEXT PRIMARY KEY,
    value TEXT NOT NULL
) STRICT;

-- A compressed piece of a stored file, addressed by BLAKE3 of its uncompressed bytes.
-- Codec 2 is a zstd frame compressed against a reference prefix: the bytes [base_lo, base_hi)
-- of an earlier stored file (the previous extract of the same table), so a monthly extract
-- that is mostly last month's costs little more than its changes.
CREATE TABLE chunk (
    id        BLOB PRIMARY KEY,
    raw_len   INTEGER NOT NULL,
    codec     INTEGER NOT NULL CHECK (codec IN (0, 1, 2)),  -- 0 stored, 1 zstd, 2 zstd delta
    base_blob BLOB REFERENCES blob(id),
    base_lo   INTEGER,
    base_hi   INTEGER,
    data      BLOB NOT NULL,
    CHECK ((codec = 2) = (base_blob IS NOT NULL AND base_lo IS NOT NULL AND base_hi IS NOT NULL))
) STRICT;

-- A stored file (an extract or an evidence file), addressed by BLAKE3 of its bytes.
CREATE TABLE blob (
    id       BLOB PRIMARY KEY,
    n_bytes  INTEGER NOT NULL,
    n_chunks INTEGER NOT NULL
) STRICT;

CREATE TABLE blob_chunk (
    blob  BLOB NOT NULL REFERENCES blob(id),
    idx   INTEGER NOT NULL,
    chunk BLOB NOT NULL REFERENCES chunk(id),
    PRIMARY KEY (blob, idx)
) STRICT, WITHOUT ROWID;

-- The hash chain. `body` is the canonical postcard encoding; `id` = BLAKE3(body);
-- `signature` = Ed25519 over `id` by the key named in the body.
CREATE TABLE commit_log (
    seq       INTEGER PRIMARY KEY,
    id        BLOB NOT NULL UNIQUE,
    body      BLOB NOT NULL,
    signature BLOB NOT NULL
) STRICT;

-- Keys the store trusts. Trust is recorded here, outside the chain; `verify --trust FILE`
-- lets an auditor decide trust without believing this list.
-- since_seq is 0 for the store's own roots (the identity that ran init, or the first to commit),
-- else the trust commit that vouched for the key; revoked_from the first of its commits no longer
-- trusted. A key's commit N is trusted when since_seq < N (or it is a root) and N < revoked_from
-- (or none).
CREATE TABLE signer (
    key         BLOB PRIMARY KEY,
    name        TEXT NOT NULL,
    email       TEXT,
    added_at    TEXT NOT NULL,
    since_seq   INTEGER NOT NULL DEFAULT 0,
    revoked_from INTEGER
) STRICT;

-- Fixes recorded but not yet committed, in the order they were recorded.
CREATE TABLE pending (
    id          INTEGER PRIMARY KEY AUTOINCREMENT,
    tbl         TEXT NOT NULL,
    fix         BLOB NOT NULL,   -- postcard of model::Fix
    note        TEXT,            -- e.g. the outcome of a carried fix
    added_at    TEXT NOT NULL,
    author_key  BLOB,            -- who recorded it (none when recorded without an identity)
    author_name TEXT,
    reopens     BLOB             -- the carried conflict it resolves, back to open if discarded
) STRICT;

-- Carried fixes whose cell changed at source to something else: decisions owed, listed by
-- `status` until resolved (`emend resolve`) or deferred at commit.
CREATE TABLE open_conflict (
    id       INTEGER PRIMARY KEY AUTOINCREMENT,
    tbl      TEXT NOT NULL,
    conflict BLOB NOT NULL,      -- postcard of model::Conflict
    added_at TEXT NOT NULL
) STRICT;

-- Derived: one row per ingest commit.
CREATE TABLE extract_index (
    tbl     TEXT NOT NULL,
    seq     INTEGER NOT NULL REFERENCES commit_log(seq),
    extract BLOB NOT NULL REFERENCES blob(id),
    PRIMARY KEY (tbl, seq)
) STRICT, WITHOUT ROWID;

-- Derived: where each row of an ingest commit's extract starts, and which group of rows holds
-- each key (src/table/row_map.rs), so a row is found without reading the table. Recomputed by
-- `verify` from the extract. Only each table's newest extract keeps one; older ones are read in
-- full.
CREATE TABLE row_map (
    seq  INTEGER PRIMARY KEY REFERENCES commit_log(seq),
    data BLOB NOT NULL
) STRICT;

-- Derived: row exclusions and column distrust.
CREATE TABLE mark (
    tbl     TEXT NOT NULL,
    kind    TEXT NOT NULL CHECK (kind IN ('exclude', 'distrust', 'keep', 'note', 'withdraw')),
    target  TEXT NOT NULL,
    seq     INTEGER NOT NULL REFERENCES commit_log(seq),
    fix_idx INTEGER NOT NULL,
    PRIMARY KEY (tbl, kind, target, seq, fix_idx)
) STRICT, WITHOUT ROWID;

-- Derived: the version hash each commit recorded for each table it changed.
CREATE TABLE version_index (
    tbl    TEXT NOT NULL,
    seq    INTEGER NOT NULL REFERENCES commit_log(seq),
    hash   BLOB NOT NULL,
    n_rows INTEGER NOT NULL,
    PRIMARY KEY (tbl, seq)
) STRICT, WITHOUT ROWID;

-- Derived: tags (one per tag commit).
CREATE TABLE tag (
    name       TEXT PRIMARY KEY,
    seq        INTEGER NOT NULL REFERENCES commit_log(seq),
    target_seq INTEGER NOT NULL REFERENCES commit_log(seq)
) STRICT;

CREATE TRIGGER chunk_no_update BEFORE UPDATE ON chunk
BEGIN SELECT RAISE(ABORT, 'stored chunks are immutable'); END;
CREATE TRIGGER chunk_no_delete BEFORE DELETE ON chunk
BEGIN SELECT RAISE(ABORT, 'stored chunks are immutable'); END;
CREATE TRIGGER blob_no_update BEFORE UPDATE ON blob
BEGIN SELECT RAISE(ABORT, 'stored files are immutable'); END;
CREATE TRIGGER blob_no_delete BEFORE DELETE ON blob
BEGIN SELECT RAISE(ABORT, 'stored files are immutable'); END;
CREATE TRIGGER blob_chunk_no_update BEFORE UPDATE ON blob_chunk
BEGIN SELECT RAISE(ABORT, 'stored files are immutable'); END;
CREATE TRIGGER blob_chunk_no_delete BEFORE DELETE ON blob_chunk
BEGIN SELECT RAISE(ABORT, 'stored files are immutable'); END;
CREATE TRIGGER commit_no_update BEFORE UPDATE ON commit_log
BEGIN SELECT RAISE(ABORT, 'commits are immutable'); END;
CREATE TRIGGER commit_no_delete BEFORE DELETE ON commit_log
BEGIN SELECT RAISE(ABORT, 'commits are immutable'); END;
