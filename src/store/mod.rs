//! The only code that speaks SQL: the store file, its schema and migrations, and every query.
//!
//! A store is one SQLite file, `.emend/store.sqlite`, in WAL mode with 16 KiB pages. Callers get
//! `model` and `hash` types back, never a `rusqlite::Row`. Every user-visible write goes through
//! [`Store::transaction`], an `IMMEDIATE` transaction that either lands whole or not at all.
//!
//! This file opens, creates and migrates the store; `read.rs` holds every query ([`Reader`]),
//! `write.rs` the write transaction ([`WriteTx`]), `index.rs` the index rows derived from commit
//! bodies, `codec.rs` how a stored piece is encoded, and `blob.rs` reading a stored file back.

mod blob;
pub mod codec;
mod index;
mod read;
mod schema_check;
mod write;

pub use blob::{BlobReader, ChunkCache};
pub use codec::{Codec, DeltaBase, EncodedPiece, PIECE_SIZE, PieceEncoder};
pub use index::{CellEditRow, IndexRows, MarkRow};
pub use read::{OpenConflict, PendingFix, Reader, SignerRecord, StoredCommit, TrustList, row_text};
pub use write::WriteTx;
use write::sql_err_busy;

use crate::error::{Error, Result};
use rusqlite::{Connection, OpenFlags, TransactionBehavior, params};
use std::path::{Path, PathBuf};
use std::time::Duration;

/// The folder that holds a store, inside the project folder.
pub const STORE_DIR: &str = ".emend";
/// The store file inside [`STORE_DIR`].
pub const STORE_FILE: &str = "store.sqlite";
/// The schema version this build writes and reads.
pub const SCHEMA_VERSION: u32 = 3;
/// SQLite `application_id` of emend stores ("emnd").
const APPLICATION_ID: i64 = 0x656d_6e64;
const SCHEMA: &str = include_str!("schema.sql");
/// Migrations from version N to N+1, indexed by N-1.
const MIGRATIONS: &[&str] = &[
    // 1 → 2: marks of kept values, notes and withdrawn fixes (SQLite cannot change a CHECK
    // in place).
    "CREATE TABLE mark_v2 (
        tbl     TEXT NOT NULL,
        kind    TEXT NOT NULL CHECK (kind IN ('exclude', 'distrust', 'keep', 'note', 'withdraw')),
        target  TEXT NOT NULL,
        seq     INTEGER NOT NULL REFERENCES commit_log(seq),
        fix_idx INTEGER NOT NULL,
        PRIMARY KEY (tbl, kind, target, seq, fix_idx)
    ) STRICT, WITHOUT ROWID;
    INSERT INTO mark_v2 SELECT tbl, kind, target, seq, fix_idx FROM mark;
    DROP TABLE mark;
    ALTER TABLE mark_v2 RENAME TO mark;",
    // 2 → 3: when each signer's trust begins and ends (filled from the trust commits by
    // `date_signers` after this step).
    // Also: who recorded each pending fix, and carried conflicts kept open.
    "ALTER TABLE signer ADD COLUMN since_seq INTEGER NOT NULL DEFAULT 0;
    ALTER TABLE signer ADD COLUMN revoked_from INTEGER;
    ALTER TABLE pending ADD COLUMN author_key BLOB;
    ALTER TABLE pending ADD COLUMN author_name TEXT;
    ALTER TABLE pending ADD COLUMN reopens BLOB;
    CREATE TABLE open_conflict (
        id       INTEGER PRIMARY KEY AUTOINCREMENT,
        tbl      TEXT NOT NULL,
        conflict BLOB NOT NULL,
        added_at TEXT NOT NULL
    ) STRICT;",
];
/// For a store made before schema v3: a signer first trusted by a trust commit is trusted from
/// that commit on (its row was written with that commit's time); the others are the store's
/// roots.
fn date_signers(tx: &rusqlite::Transaction<'_>) -> Result<()> {
    let mut stmt = tx.prepare("SELECT seq, body FROM commit_log ORDER BY seq")?;
    let rows = stmt.query_map([], |r| Ok((r.get::<_, i64>(0)?, r.get::<_, Vec<u8>>(1)?)))?;
    for row in rows {
        let (seq, bytes) = row?;
        let Ok(body) = crate::model::CommitBody::decode(&bytes) else {
            continue; // verify reports a body that does not decode
        };
        if let crate::model::Change::Trust(t) = &body.change {
            tx.execute(
                "UPDATE signer SET since_seq = ?1 WHERE key = ?2 AND since_seq = 0 AND added_at = ?3",
                rusqlite::params![seq, &t.key[..], body.time],
            )?;
        }
    }
    Ok(())
}

/// How long a writer waits for another writer before giving up.
const BUSY_WAIT: Duration = Duration::from_secs(10);

/// An open store.
pub struct Store {
    conn: Connection,
    path: PathBuf,
}

impl Store {
    /// The store file for a project folder.
    pub fn file_in(dir: &Path) -> PathBuf {
        dir.join(STORE_DIR).join(STORE_FILE)
    }

    /// Create a new store in `dir`. Fails when one is there already.
    pub fn init(dir: &Path, now: &str) -> Result<Store> {
        let path = Store::file_in(dir);
        if path.exists() {
            return Err(Error::StoreExists(path));
        }
        let folder = dir.join(STORE_DIR);
        std::fs::create_dir_all(&folder).map_err(|e| Error::io(&folder, e))?;
        let mut conn = Connection::open_with_flags(
            &path,
            OpenFlags::SQLITE_OPEN_READ_WRITE
                | OpenFlags::SQLITE_OPEN_CREATE
                | OpenFlags::SQLITE_OPEN_NO_MUTEX,
        )?;
        conn.execute_batch("PRAGMA page_size = 16384; PRAGMA journal_mode = WAL;")?;
        let tx = conn.transaction_with_behavior(TransactionBehavior::Immediate)?;
        tx.execute_batch(SCHEMA)?;
        tx.execute_batch(&format!(
            "PRAGMA application_id = {APPLICATION_ID}; PRAGMA user_version = {SCHEMA_VERSION};"
        ))?;
        tx.execute(
            "INSERT INTO store_meta (name, value) VALUES ('created_at', ?1)",
            params![now],
        )?;
        tx.commit()?;
        Store::configure(&conn)?;
        Ok(Store { conn, path })
    }

    /// Find the store for `start` by walking up its folders.
    pub fn discover(start: &Path) -> Result<Store> {
        let mut dir = Some(start);
        while let Some(d) = dir {
            let candidate = Store::file_in(d);
            if candidate.is_file() {
                return Store::open(&candidate);
            }
            dir = d.parent();
        }
        Err(Error::NoStore(start.to_path_buf()))
    }

    /// Open an existing store file. A file that is not an emend store is refused untouched.
    pub fn open(path: &Path) -> Result<Store> {
        let conn = Connection::open_with_flags(
            path,
            OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX,
        )
        .map_err(|_| Error::NotAStore(path.to_path_buf()))?;
        let app_id: i64 = conn
            .query_row("PRAGMA application_id", [], |r| r.get(0))
            .map_err(|_| Error::NotAStore(path.to_path_buf()))?;
        if app_id != APPLICATION_ID {
            return Err(Error::NotAStore(path.to_path_buf()));
        }
        let version: u32 = conn.query_row("PRAGMA user_version", [], |r| r.get(0))?;
        if version > SCHEMA_VERSION {
            return Err(Error::SchemaTooNew {
                path: path.to_path_buf(),
                found: version,
                supported: SCHEMA_VERSION,
            });
        }
        Store::configure(&conn)?;
        // Nothing runs before the store is known to hold only what emend made: a migration
        // writes, and a planted trigger would run inside it.
        let foreign = schema_check::foreign_objects(&conn, version < SCHEMA_VERSION)?;
        if !foreign.is_empty() {
            return Err(Error::ForeignSchema {
                path: path.to_path_buf(),
                objects: foreign,
            });
        }
        let mut store = Store {
            conn,
            path: path.to_path_buf(),
        };
        if version < SCHEMA_VERSION {
            store.migrate(version)?;
            let foreign = schema_check::foreign_objects(&store.conn, false)?;
            if !foreign.is_empty() {
                return Err(Error::ForeignSchema {
                    path: path.to_path_buf(),
                    objects: foreign,
                });
            }
        }
        Ok(store)
    }

    /// Open a store file for reading only, beside a writer (WAL lets both run at once).
    pub fn open_read_only(path: &Path) -> Result<Store> {
        let conn = Connection::open_with_flags(
            path,
            OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX,
        )
        .map_err(|_| Error::NotAStore(path.to_path_buf()))?;
        conn.busy_timeout(BUSY_WAIT)?;
        Ok(Store {
            conn,
            path: path.to_path_buf(),
        })
    }

    /// Open a store file for an audit: read only, without migrating and without refusing
    /// schema objects emend did not make, so `verify` can list them with everything else.
    /// Nothing is written through it, so no trigger in the file can run.
    pub fn open_for_audit(path: &Path) -> Result<Store> {
        let store = Store::open_read_only(path)?;
        let app_id: i64 = store
            .conn
            .query_row("PRAGMA application_id", [], |r| r.get(0))
            .map_err(|_| Error::NotAStore(path.to_path_buf()))?;
        if app_id != APPLICATION_ID {
            return Err(Error::NotAStore(path.to_path_buf()));
        }
        store.conn.execute_batch("PRAGMA trusted_schema = OFF;")?;
        Ok(store)
    }

    fn configure(conn: &Connection) -> Result<()> {
        conn.busy_timeout(BUSY_WAIT)?;
        // FULL makes every committed transaction survive power loss, not only a crash.
        conn.execute_batch(
            "PRAGMA foreign_keys = ON; PRAGMA synchronous = FULL; PRAGMA trusted_schema = OFF;",
        )?;
        Ok(())
    }

    fn migrate(&mut self, from: u32) -> Result<()> {
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(sql_err_busy)?;
        for v in from..SCHEMA_VERSION {
            let step = MIGRATIONS
                .get(v as usize - 1)
                .ok_or_else(|| Error::Corrupt(format!("no migration from schema v{v}")))?;
            tx.execute_batch(step)?;
        }
        if from < 3 {
            date_signers(&tx)?;
        }
        tx.execute_batch(&format!("PRAGMA user_version = {SCHEMA_VERSION};"))?;
        tx.commit()?;
        Ok(())
    }

    /// The connection itself, for tests that write old or damaged stores.
    #[cfg(test)]
    pub(crate) fn conn(&self) -> &Connection {
        &self.conn
    }

    /// The store file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The project folder (the parent of `.emend`).
    pub fn project_dir(&self) -> &Path {
        self.path
            .parent()
            .and_then(Path::parent)
            .expect("store file sits in .emend inside a folder")
    }

    /// Read access outside any write transaction.
    pub fn read(&self) -> Reader<'_> {
        Reader { conn: &self.conn }
    }

    /// Start one all-or-nothing write.
    pub fn transaction(&mut self) -> Result<WriteTx<'_>> {
        let tx = self
            .conn
            .transaction_with_behavior(TransactionBehavior::Immediate)
            .map_err(sql_err_busy)?;
        // Checked again inside the lock: nobody can plant a trigger between this and the write.
        let foreign = schema_check::foreign_objects(&tx, false)?;
        if !foreign.is_empty() {
            return Err(Error::ForeignSchema {
                path: self.path.clone(),
                objects: foreign,
            });
        }
        Ok(WriteTx { tx })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn init_twice_is_refused_and_foreign_files_are_not_stores() {
        let dir = tempfile::tempdir().unwrap();
        Store::init(dir.path(), "2026-01-01T00:00:00Z").unwrap();
        assert!(matches!(
            Store::init(dir.path(), "2026-01-01T00:00:00Z"),
            Err(Error::StoreExists(_))
        ));
        let foreign = dir.path().join("notes.sqlite");
        std::fs::write(&foreign, b"just some text, not a database").unwrap();
        assert!(matches!(Store::open(&foreign), Err(Error::NotAStore(_))));
        assert_eq!(
            std::fs::read(&foreign).unwrap(),
            b"just some text, not a database"
        );
    }

    #[test]
    fn newer_schema_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::init(dir.path(), "2026-01-01T00:00:00Z").unwrap();
        store
            .conn
            .execute_batch("PRAGMA user_version = 99;")
            .unwrap();
        drop(store);
        let err = Store::discover(dir.path()).err().expect("refused");
        assert!(
            matches!(err, Error::SchemaTooNew { found: 99, .. }),
            "{err}"
        );
    }

    #[test]
    fn a_first_version_store_gains_marks_of_kept_values_and_notes() {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::init(dir.path(), "2026-01-01T00:00:00Z").unwrap();
        // The mark table as schema version 1 wrote it, with one exclusion in it.
        store
            .conn
            .execute_batch(
                "DROP TABLE mark;
                 CREATE TABLE mark (
                     tbl TEXT NOT NULL,
                     kind TEXT NOT NULL CHECK (kind IN ('exclude', 'distrust')),
                     target TEXT NOT NULL,
                     seq INTEGER NOT NULL REFERENCES commit_log(seq),
                     fix_idx INTEGER NOT NULL,
                     PRIMARY KEY (tbl, kind, target, seq, fix_idx)
                 ) STRICT, WITHOUT ROWID;
                 DROP TABLE signer;
                 CREATE TABLE signer (key BLOB PRIMARY KEY, name TEXT NOT NULL, email TEXT, added_at TEXT NOT NULL) STRICT;
                 DROP TABLE open_conflict; DROP TABLE pending; CREATE TABLE pending (id INTEGER PRIMARY KEY AUTOINCREMENT, tbl TEXT NOT NULL, fix BLOB NOT NULL, note TEXT, added_at TEXT NOT NULL) STRICT;
                 INSERT INTO commit_log (seq, id, body, signature) VALUES (1, x'00', x'00', x'00');
                 INSERT INTO mark VALUES ('samples', 'exclude', 'S-1', 1, 0);
                 PRAGMA user_version = 1;",
            )
            .unwrap();
        drop(store);
        let store = Store::discover(dir.path()).unwrap();
        let version: u32 = store
            .conn
            .query_row("PRAGMA user_version", [], |r| r.get(0))
            .unwrap();
        assert_eq!(version, SCHEMA_VERSION);
        let kept: i64 = store
            .conn
            .query_row(
                "SELECT count(*) FROM mark WHERE kind = 'exclude'",
                [],
                |r| r.get(0),
            )
            .unwrap();
        assert_eq!(kept, 1, "the migration keeps every mark");
        store
            .conn
            .execute(
                "INSERT INTO mark VALUES ('samples', 'keep', 'S-1', 1, 1)",
                [],
            )
            .unwrap();
    }

    #[test]
    fn commits_cannot_be_rewritten_through_sql() {
        let dir = tempfile::tempdir().unwrap();
        let mut store = Store::init(dir.path(), "2026-01-01T00:00:00Z").unwrap();
        let tx = store.transaction().unwrap();
        tx.tx
            .execute(
                "INSERT INTO commit_log (seq, id, body, signature) VALUES (1, x'00', x'00', x'00')",
                [],
            )
            .unwrap();
        tx.commit().unwrap();
        let err = store
            .conn
            .execute("UPDATE commit_log SET body = x'01'", [])
            .unwrap_err();
        assert!(err.to_string().contains("immutable"), "{err}");
        let err = store
            .conn
            .execute("DELETE FROM commit_log", [])
            .unwrap_err();
        assert!(err.to_string().contains("immutable"), "{err}");
    }
}
