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
pub use read::{
    OpenConflict, PendingFix, Reader, SignerRecord, StoredChunk, StoredCommit, TrustList, row_text,
};
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
pub const SCHEMA_VERSION: u32 = 4;
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
    // 3 → 4: row maps of extracts (extracts ingested before have none, and are read in full);
    // cell edits are read from the signed bodies, so their index table goes.
    "DROP INDEX IF EXISTS cell_edit_by_seq;
    DROP TABLE IF EXISTS cell_edit;
    CREATE TABLE row_map (
        seq  INTEGER PRIMARY KEY REFERENCES commit_log(seq),
        data BLOB NOT NULL
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

/// How a store was opened for reading ([`Store::open_reading`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReadMode {
    /// Read-only, beside any writer (WAL).
    Shared,
    /// As an immutable file: the folder is read-only to this user, so SQLite could not make
    /// its WAL index; a writer elsewhere would not be seen.
    Immutable,
}

/// Opening a store the user may not write, and telling a read-only store, read-only media
/// and a full disk apart from a file that is not a store.
mod access {
    use crate::error::Error;
    use rusqlite::{Connection, ErrorCode, OpenFlags};
    use std::path::{Path, PathBuf};

    /// A read-only connection; `immutable` opens through a `file:` URI with `immutable=1`.
    pub(super) fn open_ro(path: &Path, immutable: bool) -> rusqlite::Result<Connection> {
        let flags = OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = if immutable {
            Connection::open_with_flags(
                uri(path, "immutable=1"),
                flags | OpenFlags::SQLITE_OPEN_URI,
            )?
        } else {
            Connection::open_with_flags(path, flags)?
        };
        // The first read opens the WAL index: fail here, not in a later query.
        conn.query_row("PRAGMA application_id", [], |r| r.get::<_, i64>(0))?;
        Ok(conn)
    }

    /// A `file:` URI for `path` with `query`; the characters a URI gives a meaning (`%`, `?`,
    /// `#`) and anything outside printable ASCII are percent-encoded (RFC 3986 §2.1; SQLite's
    /// "URI Filenames" page, from memory).
    pub(super) fn uri(path: &Path, query: &str) -> String {
        let abs = std::path::absolute(path).unwrap_or_else(|_| path.to_path_buf());
        let mut out = String::from("file:");
        for b in abs.as_os_str().as_encoded_bytes() {
            match b {
                b'%' | b'?' | b'#' => out.push_str(&format!("%{b:02X}")),
                0x21..=0x7e => out.push(*b as char),
                _ => out.push_str(&format!("%{b:02X}")),
            }
        }
        out.push('?');
        out.push_str(query);
        out
    }

    /// Whether a read-only open failed because the WAL index could not be made or used.
    pub(super) fn cannot_share(e: &rusqlite::Error) -> bool {
        matches!(
            e.sqlite_error_code(),
            Some(ErrorCode::CannotOpen | ErrorCode::ReadOnly | ErrorCode::PermissionDenied)
        )
    }

    /// Whether a WAL file beside the store holds anything (an immutable open would miss it).
    pub(super) fn wal_has_commits(path: &Path) -> bool {
        let mut wal = path.as_os_str().to_owned();
        wal.push("-wal");
        std::fs::metadata(PathBuf::from(wal)).is_ok_and(|m| m.len() > 0)
    }

    /// The error for a store SQLite could not open or read: a full disk, read-only access or
    /// media, or else a file that is not a store.
    pub(super) fn open_failure(path: &Path, e: rusqlite::Error) -> Error {
        match e.sqlite_error_code() {
            Some(ErrorCode::DiskFull) => Error::DiskFull {
                path: Some(path.to_path_buf()),
            },
            Some(ErrorCode::ReadOnly | ErrorCode::CannotOpen | ErrorCode::PermissionDenied) => {
                match probe(path) {
                    Some(err) => err,
                    None if path.is_file() => Error::NotAStore(path.to_path_buf()),
                    None => Error::io(
                        path,
                        std::io::Error::new(std::io::ErrorKind::NotFound, "no such file"),
                    ),
                }
            }
            _ => Error::NotAStore(path.to_path_buf()),
        }
    }

    /// The error for a store that opened, but for reading only.
    pub(super) fn read_only(path: &Path) -> Error {
        probe(path).unwrap_or(Error::ReadOnlyStore {
            path: Some(path.to_path_buf()),
        })
    }

    /// The store error an operating-system refusal to write means: EROFS is read-only media,
    /// EACCES/EPERM a read-only store, ENOSPC/EDQUOT a full disk; anything else is not ours
    /// to name.
    pub(super) fn classify(path: &Path, e: &std::io::Error) -> Option<Error> {
        use std::io::ErrorKind as K;
        match e.kind() {
            K::ReadOnlyFilesystem => Some(Error::ReadOnlyMedia(path.to_path_buf())),
            K::PermissionDenied => Some(Error::ReadOnlyStore {
                path: Some(path.to_path_buf()),
            }),
            K::StorageFull | K::QuotaExceeded => Some(Error::DiskFull {
                path: Some(path.to_path_buf()),
            }),
            _ => None,
        }
    }

    /// Try to write the store file (opened without truncating: nothing changes) and its folder
    /// (an unnamed temporary file, gone when closed); name what refuses.
    fn probe(path: &Path) -> Option<Error> {
        let classify = |e: std::io::Error| classify(path, &e);
        if let Err(e) = std::fs::OpenOptions::new().write(true).open(path) {
            return classify(e);
        }
        let folder = path.parent()?;
        tempfile::tempfile_in(folder).err().and_then(classify)
    }
}

/// Who owns a store found by walking up (issue 16).
#[cfg(unix)]
mod owner {
    use crate::error::{Error, Result};
    use std::os::unix::fs::MetadataExt;
    use std::path::Path;

    /// Refuse `store` when it or its folder belongs to someone other than this process's user.
    pub(super) fn check(store: &Path) -> Result<()> {
        let me = current_uid(store)?;
        let folder = store.parent().unwrap_or(store);
        for p in [folder, store] {
            let m = std::fs::metadata(p).map_err(|e| Error::io(p, e))?;
            if let Some(e) = foreign(p, m.uid(), me) {
                return Err(e);
            }
        }
        Ok(())
    }

    /// The ownership rule itself, pure so it can be tested without another user: a path owned
    /// by any uid but `me` is foreign.
    pub(super) fn foreign(path: &Path, owner: u32, me: u32) -> Option<Error> {
        (owner != me).then(|| Error::ForeignStore {
            path: path.to_path_buf(),
            owner,
            me,
        })
    }

    /// The effective uid, from `/proc/self/status` (`Uid: real effective saved fs`), else the
    /// owner of a fresh unnamed temporary file beside the store (files get the effective uid).
    fn current_uid(store: &Path) -> Result<u32> {
        if let Some(uid) = std::fs::read_to_string("/proc/self/status")
            .ok()
            .as_deref()
            .and_then(parse_status_uid)
        {
            return Ok(uid);
        }
        let folder = store.parent().unwrap_or(Path::new("."));
        let probe = tempfile::tempfile_in(folder)
            .or_else(|_| tempfile::tempfile())
            .map_err(|e| Error::io(folder, e))?;
        Ok(probe.metadata().map_err(|e| Error::io(folder, e))?.uid())
    }

    /// The effective uid in the text of `/proc/self/status` (proc(5)).
    pub(super) fn parse_status_uid(status: &str) -> Option<u32> {
        let line = status.lines().find_map(|l| l.strip_prefix("Uid:"))?;
        line.split_whitespace().nth(1)?.parse().ok()
    }
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
        Store::create_at(&path, now)
    }

    /// Create a new, empty store file at `path` (its folder must exist). Fails when a file is
    /// there already. A team store's `receive` builds a replacement store this way beside the
    /// one it replaces.
    pub fn create_at(path: &Path, now: &str) -> Result<Store> {
        if path.exists() {
            return Err(Error::StoreExists(path.to_path_buf()));
        }
        let path = path.to_path_buf();
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

    /// Copy every stored piece and file of the store at `other` into this one (those already
    /// here are kept), in the order `other` stored them, in one transaction. Commits are not
    /// copied: they are appended one by one, with their index rows, by the caller.
    pub fn copy_objects_from(&mut self, other: &Path) -> Result<()> {
        let name = other.to_string_lossy().into_owned();
        self.conn
            .execute("ATTACH DATABASE ?1 AS other", params![name])?;
        let copied = (|| -> Result<()> {
            let tx = self
                .conn
                .transaction_with_behavior(TransactionBehavior::Immediate)?;
            tx.execute_batch(
                "INSERT OR IGNORE INTO main.blob (id, n_bytes, n_chunks)
                     SELECT id, n_bytes, n_chunks FROM other.blob ORDER BY rowid;
                 INSERT OR IGNORE INTO main.chunk (id, raw_len, codec, base_blob, base_lo, base_hi, data)
                     SELECT id, raw_len, codec, base_blob, base_lo, base_hi, data FROM other.chunk;
                 INSERT OR IGNORE INTO main.blob_chunk (blob, idx, chunk)
                     SELECT blob, idx, chunk FROM other.blob_chunk;",
            )?;
            tx.commit()?;
            Ok(())
        })();
        let detached = self.conn.execute("DETACH DATABASE other", []);
        copied?;
        detached?;
        Ok(())
    }

    /// Find the store for `start` by walking up its folders, and open it for writing.
    pub fn discover(start: &Path) -> Result<Store> {
        Store::open(&Store::find(start)?)
    }

    /// Find the store for `start` by walking up its folders, and open it for reading only
    /// (see [`Store::open_reading`]).
    pub fn discover_read_only(start: &Path) -> Result<(Store, ReadMode)> {
        Store::open_reading(&Store::find(start)?)
    }

    /// The store file for `start`, found by walking up its folders. A store whose file or
    /// `.emend` folder belongs to another user is refused ([`Error::ForeignStore`]): whoever
    /// owns a folder above yours decides what that store says (issue 16). A store named
    /// explicitly (the CLI's `EMEND_STORE`) is opened with [`Store::open`] and not checked.
    pub fn find(start: &Path) -> Result<PathBuf> {
        let mut dir = Some(start);
        while let Some(d) = dir {
            let candidate = Store::file_in(d);
            if candidate.is_file() {
                #[cfg(unix)]
                owner::check(&candidate)?;
                return Ok(candidate);
            }
            dir = d.parent();
        }
        Err(Error::NoStore(start.to_path_buf()))
    }

    /// Open an existing store file. A file that is not an emend store is refused untouched; a
    /// store this user cannot write is refused as read-only ([`Error::ReadOnlyStore`],
    /// [`Error::ReadOnlyMedia`]) and a full disk as [`Error::DiskFull`].
    pub fn open(path: &Path) -> Result<Store> {
        let conn = Connection::open_with_flags(
            path,
            OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX,
        )
        .map_err(|e| access::open_failure(path, e))?;
        let app_id: i64 = conn
            .query_row("PRAGMA application_id", [], |r| r.get(0))
            .map_err(|e| access::open_failure(path, e))?;
        // SQLite opens a file it may not write for reading only, without saying so.
        if conn.is_readonly(rusqlite::MAIN_DB).unwrap_or(false) && app_id == APPLICATION_ID {
            return Err(access::read_only(path));
        }
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
        Ok(Store::open_reading(path)?.0)
    }

    /// Open a store file for reading only, and say how: shared with writers (WAL), or, when
    /// this user cannot create the WAL index beside a store in a read-only folder, as an
    /// immutable file (SQLite's `immutable=1`: no locks, no WAL; only done when no WAL file
    /// holds unmerged commits). A file that is not an emend store, or a newer schema, is
    /// refused; an older schema is migrated by [`Store::open`] (which needs write access).
    pub fn open_reading(path: &Path) -> Result<(Store, ReadMode)> {
        let (conn, mode) = match access::open_ro(path, false) {
            Ok(conn) => (conn, ReadMode::Shared),
            Err(e) if access::cannot_share(&e) && !access::wal_has_commits(path) => {
                match access::open_ro(path, true) {
                    Ok(conn) => (conn, ReadMode::Immutable),
                    Err(e) => return Err(access::open_failure(path, e)),
                }
            }
            Err(e) => return Err(access::open_failure(path, e)),
        };
        let (app_id, version): (i64, u32) = conn
            .query_row(
                "SELECT * FROM pragma_application_id, pragma_user_version",
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .map_err(|e| access::open_failure(path, e))?;
        if app_id != APPLICATION_ID {
            return Err(Error::NotAStore(path.to_path_buf()));
        }
        if version > SCHEMA_VERSION {
            return Err(Error::SchemaTooNew {
                path: path.to_path_buf(),
                found: version,
                supported: SCHEMA_VERSION,
            });
        }
        if version < SCHEMA_VERSION {
            drop(conn);
            return Ok((Store::open(path)?, ReadMode::Shared));
        }
        conn.busy_timeout(BUSY_WAIT)?;
        conn.execute_batch("PRAGMA trusted_schema = OFF;")?;
        Ok((
            Store {
                conn,
                path: path.to_path_buf(),
            },
            mode,
        ))
    }

    /// Open a store file for an audit: read only, without migrating and without refusing
    /// schema objects emend did not make, so `verify` can list them with everything else.
    /// Nothing is written through it, so no trigger in the file can run.
    pub fn open_for_audit(path: &Path) -> Result<Store> {
        // A read-only open checks the application id and schema version and runs nothing.
        Store::open_read_only(path)
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

    /// Run `f` on one consistent snapshot of the store: every query inside sees the same
    /// commits, even while other processes commit (a read transaction in WAL mode).
    pub fn snapshot<T>(&self, f: impl FnOnce(&Reader<'_>) -> Result<T>) -> Result<T> {
        let tx = self.conn.unchecked_transaction()?;
        let out = f(&Reader { conn: &tx });
        tx.finish()?;
        out
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
                 DROP TABLE row_map; DROP TABLE open_conflict; DROP TABLE pending; CREATE TABLE pending (id INTEGER PRIMARY KEY AUTOINCREMENT, tbl TEXT NOT NULL, fix BLOB NOT NULL, note TEXT, added_at TEXT NOT NULL) STRICT;
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

    #[cfg(unix)]
    #[test]
    fn a_store_owned_by_another_user_is_foreign_and_ones_own_is_not() {
        let p = Path::new("/shared/project/.emend/store.sqlite");
        assert!(owner::foreign(p, 1000, 1000).is_none());
        let err = owner::foreign(p, 0, 1000).expect("another owner is refused");
        assert!(
            matches!(
                err,
                Error::ForeignStore {
                    owner: 0,
                    me: 1000,
                    ..
                }
            ),
            "{err}"
        );
        assert!(err.to_string().contains("belongs to another user"), "{err}");
        assert!(err.hint().unwrap().contains("EMEND_STORE="), "{err}");
        // Root gets no exception: a store someone else made is theirs to shape.
        assert!(owner::foreign(p, 1000, 0).is_some());
    }

    #[cfg(unix)]
    #[test]
    fn the_effective_uid_is_read_from_proc_status() {
        // proc(5): "Uid: Real, effective, saved set, and filesystem UIDs".
        let status =
            "Name:\temend\nUmask:\t0022\nUid:\t1000\t1001\t1000\t1001\nGid:\t100\t100\t100\t100\n";
        assert_eq!(owner::parse_status_uid(status), Some(1001));
        assert_eq!(owner::parse_status_uid("Name:\temend\n"), None);
        // This process: its own files have the uid it reads.
        use std::os::unix::fs::MetadataExt;
        let dir = tempfile::tempdir().unwrap();
        let mine = std::fs::metadata(dir.path()).unwrap().uid();
        let me = owner::parse_status_uid(&std::fs::read_to_string("/proc/self/status").unwrap());
        assert_eq!(me, Some(mine));
        // A store one made oneself is found.
        Store::init(dir.path(), "2026-01-01T00:00:00Z").unwrap();
        let inner = dir.path().join("a/b");
        std::fs::create_dir_all(&inner).unwrap();
        assert_eq!(Store::find(&inner).unwrap(), Store::file_in(dir.path()));
    }

    #[test]
    fn a_full_disk_is_reported_as_such_and_changes_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let mut store = Store::init(dir.path(), "2026-01-01T00:00:00Z").unwrap();
        // SQLite's max_page_count caps the file at its current size: the next page it needs
        // fails with SQLITE_FULL, as a full disk does (sqlite.org/pragma.html#pragma_max_page_count).
        let pages: i64 = store
            .conn
            .query_row("PRAGMA page_count", [], |r| r.get(0))
            .unwrap();
        store
            .conn
            .execute_batch(&format!("PRAGMA max_page_count = {pages};"))
            .unwrap();
        let before = crate::store::Store::file_in(dir.path());
        let err = (|| -> Result<()> {
            let tx = store.transaction()?;
            let big = vec![7u8; 1 << 20];
            tx.tx.execute(
                "INSERT INTO store_meta (name, value) VALUES ('filler', ?1)",
                params![data_encoding::HEXLOWER.encode(&big)],
            )?;
            tx.commit()
        })()
        .expect_err("a write past the size limit fails");
        assert!(matches!(err, Error::DiskFull { .. }), "{err}");
        assert!(err.to_string().contains("no space left"), "{err}");
        assert!(err.hint().unwrap().contains("free space"), "{err}");
        drop(store);
        let store = Store::open(&before).unwrap();
        let n: i64 = store
            .conn
            .query_row(
                "SELECT count(*) FROM store_meta WHERE name = 'filler'",
                [],
                |r| r.get(0),
            )
            .unwrap();
        assert_eq!(n, 0, "the failed write was rolled back");
    }

    #[test]
    fn a_store_reads_as_an_immutable_file_through_a_uri_with_awkward_characters() {
        let dir = tempfile::tempdir().unwrap();
        let project = dir.path().join("100% sure?#yes");
        Store::init(&project, "2026-01-01T00:00:00Z").unwrap();
        let path = Store::file_in(&project);
        let uri = access::uri(&path, "immutable=1");
        assert!(uri.contains("100%25%20sure%3F%23yes"), "{uri}");
        let conn = access::open_ro(&path, true).expect("immutable open");
        let app_id: i64 = conn
            .query_row("PRAGMA application_id", [], |r| r.get(0))
            .unwrap();
        assert_eq!(app_id, APPLICATION_ID);
        let (_, mode) = Store::open_reading(&path).unwrap();
        assert_eq!(mode, ReadMode::Shared);
        // A file that is not a store is still refused when read.
        let foreign = dir.path().join("notes.sqlite");
        std::fs::write(&foreign, b"just some text, not a database").unwrap();
        assert!(matches!(
            Store::open_reading(&foreign),
            Err(Error::NotAStore(_))
        ));
    }

    #[test]
    fn refusals_to_write_name_read_only_media_a_read_only_store_and_a_full_disk() {
        // errno values of Linux (errno(3), asm-generic/errno-base.h; from memory): EROFS 30,
        // EACCES 13, ENOSPC 28; the standard library maps them to these kinds.
        let p = Path::new("/media/usb/.emend/store.sqlite");
        let os = std::io::Error::from_raw_os_error;
        let media = access::classify(p, &os(30)).unwrap();
        assert!(matches!(media, Error::ReadOnlyMedia(_)), "{media}");
        assert!(media.to_string().contains("read-only media"), "{media}");
        assert!(media.hint().unwrap().contains("still work"));
        let ro = access::classify(p, &os(13)).unwrap();
        assert!(matches!(ro, Error::ReadOnlyStore { .. }), "{ro}");
        assert!(ro.to_string().contains("is read-only to you"), "{ro}");
        let full = access::classify(p, &os(28)).unwrap();
        assert!(matches!(full, Error::DiskFull { .. }), "{full}");
        assert!(
            access::classify(p, &os(2)).is_none(),
            "ENOENT is not ours to name"
        );
        // SQLite's own codes map the same way wherever they surface
        // (sqlite.org/rescode.html: SQLITE_READONLY 8, SQLITE_FULL 13).
        let sqlite = |code: i32| {
            Error::from(rusqlite::Error::SqliteFailure(
                rusqlite::ffi::Error::new(code),
                None,
            ))
        };
        assert!(matches!(sqlite(8), Error::ReadOnlyStore { path: None }));
        assert!(matches!(sqlite(13), Error::DiskFull { path: None }));
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
