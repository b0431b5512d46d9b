//! The only code that speaks SQL: the store file, its schema and migrations, and every query.
//!
//! A store is one SQLite file, `.emend/store.sqlite`, in WAL mode with 16 KiB pages. Callers get
//! `model` and `hash` types back, never a `rusqlite::Row`. Every user-visible write goes through
//! [`Store::transaction`], an `IMMEDIATE` transaction that either lands whole or not at all.

mod blob;

pub use blob::{BlobReader, ChunkCache};

use crate::error::{Error, Result};
use crate::hash::{BlobId, ChunkId, CommitId};
use crate::model::{Change, CommitBody, Fix, RowId};
use rusqlite::{Connection, OpenFlags, OptionalExtension, TransactionBehavior, params};
use std::path::{Path, PathBuf};
use std::rc::Rc;
use std::time::Duration;

/// The folder that holds a store, inside the project folder.
pub const STORE_DIR: &str = ".emend";
/// The store file inside [`STORE_DIR`].
pub const STORE_FILE: &str = "store.sqlite";
/// The schema version this build writes and reads.
pub const SCHEMA_VERSION: u32 = 1;
/// SQLite `application_id` of emend stores ("emnd").
const APPLICATION_ID: i64 = 0x656d_6e64;
const SCHEMA: &str = include_str!("schema.sql");
/// Migrations from version N to N+1, indexed by N-1. Empty until a second version ships.
const MIGRATIONS: &[&str] = &[];
/// How long a writer waits for another writer before giving up.
const BUSY_WAIT: Duration = Duration::from_secs(10);

/// An open store.
pub struct Store {
    conn: Connection,
    path: PathBuf,
}

/// A commit as stored: sequence, id, the canonical body bytes and the signature.
#[derive(Debug, Clone)]
pub struct StoredCommit {
    /// Sequence number.
    pub seq: u64,
    /// Stored id.
    pub id: CommitId,
    /// Canonical body bytes.
    pub body: Vec<u8>,
    /// Ed25519 signature over the id.
    pub signature: Vec<u8>,
}

/// A fix waiting to be committed.
#[derive(Debug, Clone)]
pub struct PendingFix {
    /// Order of recording.
    pub id: i64,
    /// The fix.
    pub fix: Fix,
    /// When it was recorded.
    pub added_at: String,
    /// A note for `status` (the outcome of a carried fix).
    pub note: Option<String>,
}

/// A trusted signer.
#[derive(Debug, Clone)]
pub struct SignerRecord {
    /// Public key.
    pub key: [u8; 32],
    /// Display name.
    pub name: String,
    /// E-mail.
    pub email: Option<String>,
    /// When trust was recorded.
    pub added_at: String,
}

/// One row of the cell-edit index.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct CellEditRow {
    /// Table.
    pub table: String,
    /// Row.
    pub row: String,
    /// Column.
    pub column: String,
    /// Commit sequence.
    pub seq: u64,
    /// Index of the fix within the commit.
    pub fix_idx: u64,
    /// Value before.
    pub old: Option<String>,
    /// Value after.
    pub new: Option<String>,
}

/// One row of the mark index (exclusions and distrust).
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct MarkRow {
    /// Table.
    pub table: String,
    /// `exclude` or `distrust`.
    pub kind: String,
    /// Row id or column name.
    pub target: String,
    /// Commit sequence.
    pub seq: u64,
    /// Index of the fix within the commit.
    pub fix_idx: u64,
}

/// Every derived index row, for comparison by `verify`.
#[derive(Debug, Default, PartialEq, Eq)]
pub struct IndexRows {
    /// extract_index rows: (table, seq, extract).
    pub extracts: Vec<(String, u64, [u8; 32])>,
    /// cell_edit rows.
    pub cells: Vec<CellEditRow>,
    /// mark rows.
    pub marks: Vec<MarkRow>,
    /// version_index rows: (table, seq, hash, n_rows).
    pub versions: Vec<(String, u64, [u8; 32], u64)>,
    /// tag rows: (name, tag commit seq, target seq).
    pub tags: Vec<(String, u64, u64)>,
}

impl IndexRows {
    /// The rows a commit body implies.
    pub fn from_body(body: &CommitBody) -> Self {
        let mut out = IndexRows::default();
        out.add_body(body);
        out
    }

    /// Add the rows a commit body implies.
    pub fn add_body(&mut self, body: &CommitBody) {
        let seq = body.seq;
        match &body.change {
            Change::Tag(_) | Change::Trust(_) => {}
            Change::Ingest(r) => {
                self.extracts
                    .push((r.table.clone(), seq, *r.extract.as_bytes()));
            }
            Change::Fixes(records) => {
                for (fix_idx, rec) in records.iter().enumerate() {
                    let table = &rec.fix.table;
                    for e in &rec.edits {
                        self.cells.push(CellEditRow {
                            table: table.clone(),
                            row: e.row.0.clone(),
                            column: e.column.clone(),
                            seq,
                            fix_idx: fix_idx as u64,
                            old: e.old.clone(),
                            new: e.new.clone(),
                        });
                    }
                    let mark = match &rec.fix.action {
                        crate::model::FixAction::Exclude { row } => {
                            Some(("exclude", row.0.clone()))
                        }
                        crate::model::FixAction::Distrust { column } => {
                            Some(("distrust", column.clone()))
                        }
                        _ => None,
                    };
                    if let Some((kind, target)) = mark {
                        self.marks.push(MarkRow {
                            table: table.clone(),
                            kind: kind.into(),
                            target,
                            seq,
                            fix_idx: fix_idx as u64,
                        });
                    }
                }
            }
        }
        if let Change::Tag(t) = &body.change {
            self.tags.push((t.name.clone(), seq, t.target_seq));
        }
        for v in &body.versions {
            self.versions
                .push((v.table.clone(), seq, *v.hash.as_bytes(), v.n_rows));
        }
    }

    /// Sort every list, so two sets of rows compare equal regardless of order.
    pub fn sort(&mut self) {
        self.extracts.sort();
        self.cells.sort();
        self.marks.sort();
        self.versions.sort();
        self.tags.sort();
    }
}

fn sql_err_busy(e: rusqlite::Error) -> Error {
    if let rusqlite::Error::SqliteFailure(f, _) = &e
        && matches!(
            f.code,
            rusqlite::ErrorCode::DatabaseBusy | rusqlite::ErrorCode::DatabaseLocked
        )
    {
        return Error::Busy;
    }
    Error::Sqlite(e)
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
        let mut store = Store {
            conn,
            path: path.to_path_buf(),
        };
        if version < SCHEMA_VERSION {
            store.migrate(version)?;
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
        tx.execute_batch(&format!("PRAGMA user_version = {SCHEMA_VERSION};"))?;
        tx.commit()?;
        Ok(())
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
        Ok(WriteTx { tx })
    }
}

/// Read queries, usable both on a store and inside a write transaction.
#[derive(Clone, Copy)]
pub struct Reader<'a> {
    conn: &'a Connection,
}

impl<'a> Reader<'a> {
    /// The newest commit's sequence and id.
    pub fn head(&self) -> Result<Option<(u64, CommitId)>> {
        Ok(self
            .conn
            .query_row(
                "SELECT seq, id FROM commit_log ORDER BY seq DESC LIMIT 1",
                [],
                |r| Ok((r.get::<_, i64>(0)? as u64, r.get::<_, [u8; 32]>(1)?)),
            )
            .optional()?
            .map(|(s, id)| (s, CommitId::from_bytes(id))))
    }

    /// Every commit in sequence order.
    pub fn commits(&self) -> Result<Vec<StoredCommit>> {
        let mut stmt = self
            .conn
            .prepare("SELECT seq, id, body, signature FROM commit_log ORDER BY seq")?;
        let rows = stmt.query_map([], stored_commit)?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The commit with sequence `seq`.
    pub fn try_commit(&self, seq: u64) -> Result<Option<StoredCommit>> {
        Ok(self
            .conn
            .query_row(
                "SELECT seq, id, body, signature FROM commit_log WHERE seq = ?1",
                params![sq(seq)],
                stored_commit,
            )
            .optional()?)
    }

    /// Sequences of commits whose id starts with the hex `prefix`.
    pub fn commits_with_prefix(&self, prefix: &str) -> Result<Vec<(u64, CommitId)>> {
        let mut stmt = self
            .conn
            .prepare_cached("SELECT seq, id FROM commit_log ORDER BY seq")?;
        let rows = stmt.query_map([], |r| {
            Ok((r.get::<_, i64>(0)? as u64, r.get::<_, [u8; 32]>(1)?))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (seq, id) = row?;
            let id = CommitId::from_bytes(id);
            if id.to_hex().starts_with(prefix) {
                out.push((seq, id));
            }
        }
        Ok(out)
    }

    /// Names of tables with at least one extract, in order of first ingest.
    pub fn table_names(&self) -> Result<Vec<String>> {
        let mut stmt = self
            .conn
            .prepare("SELECT tbl FROM extract_index GROUP BY tbl ORDER BY MIN(seq)")?;
        let rows = stmt.query_map([], |r| r.get(0))?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The newest ingest of `table` at or before `seq`: (ingest seq, extract id).
    pub fn extract_at(&self, table: &str, seq: u64) -> Result<Option<(u64, BlobId)>> {
        Ok(self
            .conn
            .prepare_cached(
                "SELECT seq, extract FROM extract_index WHERE tbl = ?1 AND seq <= ?2
                 ORDER BY seq DESC LIMIT 1",
            )?
            .query_row(params![table, sq(seq)], |r| {
                Ok((r.get::<_, i64>(0)? as u64, r.get::<_, [u8; 32]>(1)?))
            })
            .optional()?
            .map(|(s, b)| (s, BlobId::from_bytes(b))))
    }

    /// Every ingest of `table`: (seq, extract), oldest first.
    pub fn extracts_of(&self, table: &str) -> Result<Vec<(u64, BlobId)>> {
        let mut stmt = self
            .conn
            .prepare_cached("SELECT seq, extract FROM extract_index WHERE tbl = ?1 ORDER BY seq")?;
        let rows = stmt.query_map(params![table], |r| {
            Ok((r.get::<_, i64>(0)? as u64, r.get::<_, [u8; 32]>(1)?))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (s, b) = row?;
            out.push((s, BlobId::from_bytes(b)));
        }
        Ok(out)
    }

    /// Cell edits of `table` with `after < seq <= upto`, in the order they were made.
    pub fn cell_edits(&self, table: &str, after: u64, upto: u64) -> Result<Vec<CellEditRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT row_id, col, seq, fix_idx, old, new FROM cell_edit
             WHERE tbl = ?1 AND seq > ?2 AND seq <= ?3 ORDER BY seq, fix_idx",
        )?;
        let rows = stmt.query_map(params![table, sq(after), sq(upto)], |r| {
            Ok(CellEditRow {
                table: table.to_string(),
                row: r.get(0)?,
                column: r.get(1)?,
                seq: r.get::<_, i64>(2)? as u64,
                fix_idx: r.get::<_, i64>(3)? as u64,
                old: r.get(4)?,
                new: r.get(5)?,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Marks of `table` with `after < seq <= upto`.
    pub fn marks(&self, table: &str, after: u64, upto: u64) -> Result<Vec<MarkRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT kind, target, seq, fix_idx FROM mark
             WHERE tbl = ?1 AND seq > ?2 AND seq <= ?3 ORDER BY seq, fix_idx",
        )?;
        let rows = stmt.query_map(params![table, sq(after), sq(upto)], |r| {
            Ok(MarkRow {
                table: table.to_string(),
                kind: r.get(0)?,
                target: r.get(1)?,
                seq: r.get::<_, i64>(2)? as u64,
                fix_idx: r.get::<_, i64>(3)? as u64,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Every derived index row, sorted.
    pub fn index_rows(&self) -> Result<IndexRows> {
        let mut out = IndexRows::default();
        let mut stmt = self
            .conn
            .prepare("SELECT tbl, seq, extract FROM extract_index")?;
        for row in stmt.query_map([], |r| {
            Ok((r.get(0)?, r.get::<_, i64>(1)? as u64, blob32(r, 2)?))
        })? {
            out.extracts.push(row?);
        }
        let mut stmt = self
            .conn
            .prepare("SELECT tbl, row_id, col, seq, fix_idx, old, new FROM cell_edit")?;
        for row in stmt.query_map([], |r| {
            Ok(CellEditRow {
                table: r.get(0)?,
                row: r.get(1)?,
                column: r.get(2)?,
                seq: r.get::<_, i64>(3)? as u64,
                fix_idx: r.get::<_, i64>(4)? as u64,
                old: r.get(5)?,
                new: r.get(6)?,
            })
        })? {
            out.cells.push(row?);
        }
        let mut stmt = self
            .conn
            .prepare("SELECT tbl, kind, target, seq, fix_idx FROM mark")?;
        for row in stmt.query_map([], |r| {
            Ok(MarkRow {
                table: r.get(0)?,
                kind: r.get(1)?,
                target: r.get(2)?,
                seq: r.get::<_, i64>(3)? as u64,
                fix_idx: r.get::<_, i64>(4)? as u64,
            })
        })? {
            out.marks.push(row?);
        }
        let mut stmt = self
            .conn
            .prepare("SELECT tbl, seq, hash, n_rows FROM version_index")?;
        for row in stmt.query_map([], |r| {
            Ok((
                r.get(0)?,
                r.get::<_, i64>(1)? as u64,
                blob32(r, 2)?,
                r.get::<_, i64>(3)? as u64,
            ))
        })? {
            out.versions.push(row?);
        }
        let mut stmt = self.conn.prepare("SELECT name, seq, target_seq FROM tag")?;
        for row in stmt.query_map([], |r| {
            Ok((
                r.get(0)?,
                r.get::<_, i64>(1)? as u64,
                r.get::<_, i64>(2)? as u64,
            ))
        })? {
            out.tags.push(row?);
        }
        out.sort();
        Ok(out)
    }

    /// The tag `name`: (tag commit seq, target seq).
    pub fn try_tag(&self, name: &str) -> Result<Option<(u64, u64)>> {
        Ok(self
            .conn
            .prepare_cached("SELECT seq, target_seq FROM tag WHERE name = ?1")?
            .query_row(params![name], |r| {
                Ok((r.get::<_, i64>(0)? as u64, r.get::<_, i64>(1)? as u64))
            })
            .optional()?)
    }

    /// Every tag: (name, tag commit seq, target seq), in order of tagging.
    pub fn tags(&self) -> Result<Vec<(String, u64, u64)>> {
        let mut stmt = self
            .conn
            .prepare("SELECT name, seq, target_seq FROM tag ORDER BY seq")?;
        let rows = stmt.query_map([], |r| {
            Ok((
                r.get(0)?,
                r.get::<_, i64>(1)? as u64,
                r.get::<_, i64>(2)? as u64,
            ))
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Edits of one cell with `after < seq <= upto`, oldest first.
    pub fn cell_history(
        &self,
        table: &str,
        row: &str,
        column: &str,
        after: u64,
        upto: u64,
    ) -> Result<Vec<CellEditRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT col, seq, fix_idx, old, new FROM cell_edit
             WHERE tbl = ?1 AND row_id = ?2 AND col = ?3 AND seq > ?4 AND seq <= ?5
             ORDER BY seq, fix_idx",
        )?;
        let rows = stmt.query_map(params![table, row, column, sq(after), sq(upto)], |r| {
            cell_edit_row(table, row, r)
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Edits of every cell of one row with `after < seq <= upto`, oldest first.
    pub fn row_history(
        &self,
        table: &str,
        row: &str,
        after: u64,
        upto: u64,
    ) -> Result<Vec<CellEditRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT col, seq, fix_idx, old, new FROM cell_edit
             WHERE tbl = ?1 AND row_id = ?2 AND seq > ?3 AND seq <= ?4
             ORDER BY seq, fix_idx",
        )?;
        let rows = stmt.query_map(params![table, row, sq(after), sq(upto)], |r| {
            cell_edit_row(table, row, r)
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Marks naming one target (a row id or a column) with `after < seq <= upto`.
    pub fn marks_of(
        &self,
        table: &str,
        kind: &str,
        target: &str,
        after: u64,
        upto: u64,
    ) -> Result<Vec<MarkRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT seq, fix_idx FROM mark
             WHERE tbl = ?1 AND kind = ?2 AND target = ?3 AND seq > ?4 AND seq <= ?5
             ORDER BY seq, fix_idx",
        )?;
        let rows = stmt.query_map(params![table, kind, target, sq(after), sq(upto)], |r| {
            Ok(MarkRow {
                table: table.to_string(),
                kind: kind.to_string(),
                target: target.to_string(),
                seq: r.get::<_, i64>(0)? as u64,
                fix_idx: r.get::<_, i64>(1)? as u64,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Pending fixes in the order they were recorded.
    pub fn pending(&self) -> Result<Vec<PendingFix>> {
        let mut stmt = self
            .conn
            .prepare("SELECT id, fix, added_at, note FROM pending ORDER BY id")?;
        let rows = stmt.query_map([], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, Vec<u8>>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, Option<String>>(3)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (id, bytes, added_at, note) = row?;
            let fix: Fix = postcard::from_bytes(&bytes)
                .map_err(|e| Error::Corrupt(format!("pending fix {id} does not decode: {e}")))?;
            out.push(PendingFix {
                id,
                fix,
                added_at,
                note,
            });
        }
        Ok(out)
    }

    /// Trusted signers.
    pub fn signers(&self) -> Result<Vec<SignerRecord>> {
        let mut stmt = self
            .conn
            .prepare("SELECT key, name, email, added_at FROM signer ORDER BY added_at, name")?;
        let rows = stmt.query_map([], |r| {
            Ok(SignerRecord {
                key: blob32(r, 0)?,
                name: r.get(1)?,
                email: r.get(2)?,
                added_at: r.get(3)?,
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Whether a blob is stored.
    pub fn has_blob(&self, id: &BlobId) -> Result<bool> {
        Ok(self
            .conn
            .prepare_cached("SELECT 1 FROM blob WHERE id = ?1")?
            .query_row(params![id.as_bytes()], |_| Ok(()))
            .optional()?
            .is_some())
    }

    /// Whether a chunk is stored.
    pub fn has_chunk(&self, id: &ChunkId) -> Result<bool> {
        Ok(self
            .conn
            .prepare_cached("SELECT 1 FROM chunk WHERE id = ?1")?
            .query_row(params![id.as_bytes()], |_| Ok(()))
            .optional()?
            .is_some())
    }

    /// The size of a stored file, if it is stored.
    pub fn blobs_sized(&self, id: &BlobId) -> Result<Option<u64>> {
        Ok(self
            .conn
            .prepare_cached("SELECT n_bytes FROM blob WHERE id = ?1")?
            .query_row(params![id.as_bytes()], |r| r.get::<_, i64>(0))
            .optional()?
            .map(|n| n as u64))
    }

    /// The store file this reader reads.
    pub fn path(&self) -> &Path {
        Path::new(self.conn.path().unwrap_or(""))
    }

    /// Every blob: (id, size, chunk count), oldest first.
    pub fn blobs(&self) -> Result<Vec<(BlobId, u64, u64)>> {
        let mut stmt = self
            .conn
            .prepare("SELECT id, n_bytes, n_chunks FROM blob ORDER BY rowid")?;
        let rows = stmt.query_map([], |r| {
            Ok((
                BlobId::from_bytes(blob32(r, 0)?),
                r.get::<_, i64>(1)? as u64,
                r.get::<_, i64>(2)? as u64,
            ))
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Every chunk id, in id order.
    pub fn chunk_ids(&self) -> Result<Vec<ChunkId>> {
        let mut stmt = self.conn.prepare("SELECT id FROM chunk ORDER BY id")?;
        let rows = stmt.query_map([], |r| Ok(ChunkId::from_bytes(blob32(r, 0)?)))?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// The chunk ids of a blob, in order.
    pub fn blob_chunks(&self, id: &BlobId) -> Result<Vec<ChunkId>> {
        let mut stmt = self
            .conn
            .prepare_cached("SELECT chunk FROM blob_chunk WHERE blob = ?1 ORDER BY idx")?;
        let rows = stmt.query_map(params![id.as_bytes()], |r| {
            Ok(ChunkId::from_bytes(blob32(r, 0)?))
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// A chunk's uncompressed bytes, appended to `out`. Does not check the hash.
    pub fn read_chunk(&self, id: &ChunkId, out: &mut Vec<u8>) -> Result<()> {
        let bytes = self.chunk_bytes(id, &mut ChunkCache::default())?;
        out.extend_from_slice(&bytes);
        Ok(())
    }

    /// A chunk's uncompressed bytes, through `cache`. Delta chunks rebuild their reference
    /// bytes first (which may be deltas themselves); the cache keeps that linear when a file is
    /// read in order.
    pub fn chunk_bytes(&self, id: &ChunkId, cache: &mut ChunkCache) -> Result<Rc<Vec<u8>>> {
        self.chunk_bytes_at(id, cache, 0, true)
    }

    /// Like [`Reader::chunk_bytes`], for a chunk read once in order: the chunk itself is not
    /// kept in the cache (only the reference pieces it needs are), so reading a plain file
    /// holds one chunk, not the cache's worth.
    pub fn chunk_bytes_once(&self, id: &ChunkId, cache: &mut ChunkCache) -> Result<Rc<Vec<u8>>> {
        self.chunk_bytes_at(id, cache, 0, false)
    }

    fn chunk_bytes_at(
        &self,
        id: &ChunkId,
        cache: &mut ChunkCache,
        depth: usize,
        keep: bool,
    ) -> Result<Rc<Vec<u8>>> {
        if let Some(hit) = cache.get(id) {
            return Ok(hit);
        }
        if depth > MAX_DELTA_DEPTH {
            return Err(Error::Corrupt(format!(
                "chunk {id} sits under more than {MAX_DELTA_DEPTH} delta layers (a reference loop?)"
            )));
        }
        type ChunkRow = (i64, i64, Option<Vec<u8>>, Option<i64>, Option<i64>, Vec<u8>);
        let (raw_len, codec, base_blob, base_lo, base_hi, data): ChunkRow = self
            .conn
            .prepare_cached(
                "SELECT raw_len, codec, base_blob, base_lo, base_hi, data FROM chunk WHERE id = ?1",
            )?
            .query_row(params![id.as_bytes()], |r| {
                Ok((
                    r.get(0)?,
                    r.get(1)?,
                    r.get(2)?,
                    r.get(3)?,
                    r.get(4)?,
                    r.get(5)?,
                ))
            })
            .optional()?
            .ok_or_else(|| Error::Corrupt(format!("chunk {id} is missing")))?;
        let bad = |what: String| Error::Corrupt(format!("chunk {id} {what}"));
        let raw = match codec {
            0 => data,
            1 => zstd::bulk::decompress(&data, raw_len.max(0) as usize)
                .map_err(|e| bad(format!("does not decompress: {e}")))?,
            2 => {
                let (Some(base), Some(lo), Some(hi)) = (base_blob, base_lo, base_hi) else {
                    return Err(bad("is a delta without a reference".into()));
                };
                let base: [u8; 32] = base
                    .try_into()
                    .map_err(|_| bad("names a reference that is not an id".into()))?;
                if lo < 0 || hi < lo {
                    return Err(bad(format!("has a reference range {lo}..{hi}")));
                }
                let prefix = self.blob_range_at(
                    &BlobId::from_bytes(base),
                    lo as u64,
                    hi as u64,
                    cache,
                    depth + 1,
                )?;
                delta_decompress(&data, &prefix, raw_len.max(0) as usize)
                    .map_err(|e| bad(format!("does not decompress against its reference: {e}")))?
            }
            other => return Err(bad(format!("has unknown codec {other}"))),
        };
        if raw.len() as i64 != raw_len {
            return Err(bad(format!(
                "holds {} bytes, its record says {raw_len}",
                raw.len()
            )));
        }
        let raw = Rc::new(raw);
        if keep {
            cache.put(*id, raw.clone());
        }
        Ok(raw)
    }

    /// The chunks of a stored file with their offsets: (chunk, start, length), in order.
    pub fn blob_layout(&self, id: &BlobId) -> Result<Vec<(ChunkId, u64, u64)>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT bc.chunk, c.raw_len FROM blob_chunk bc JOIN chunk c ON c.id = bc.chunk
             WHERE bc.blob = ?1 ORDER BY bc.idx",
        )?;
        let rows = stmt.query_map(params![id.as_bytes()], |r| {
            Ok((
                ChunkId::from_bytes(blob32(r, 0)?),
                r.get::<_, i64>(1)? as u64,
            ))
        })?;
        let mut out = Vec::new();
        let mut at = 0u64;
        for row in rows {
            let (chunk, len) = row?;
            out.push((chunk, at, len));
            at += len;
        }
        Ok(out)
    }

    /// Bytes `[lo, hi)` of a stored file.
    pub fn blob_range(
        &self,
        id: &BlobId,
        lo: u64,
        hi: u64,
        cache: &mut ChunkCache,
    ) -> Result<Vec<u8>> {
        self.blob_range_at(id, lo, hi, cache, 0)
    }

    fn blob_range_at(
        &self,
        id: &BlobId,
        lo: u64,
        hi: u64,
        cache: &mut ChunkCache,
        depth: usize,
    ) -> Result<Vec<u8>> {
        let layout = match cache.layout(id) {
            Some(l) => l,
            None => {
                let l = Rc::new(self.blob_layout(id)?);
                cache.put_layout(*id, l.clone());
                l
            }
        };
        let mut out = Vec::with_capacity((hi - lo) as usize);
        for (chunk, start, len) in layout.iter() {
            let end = start + len;
            if end <= lo || *start >= hi {
                continue;
            }
            let bytes = self.chunk_bytes_at(chunk, cache, depth, true)?;
            let a = lo.max(*start) - start;
            let b = hi.min(end) - start;
            out.extend_from_slice(&bytes[a as usize..b as usize]);
        }
        if out.len() as u64 != hi - lo {
            return Err(Error::Corrupt(format!(
                "stored file {id} is shorter than the range {lo}..{hi} a delta refers to"
            )));
        }
        Ok(out)
    }

    /// A reader over a stored blob's bytes.
    pub fn open_blob(&self, id: &BlobId) -> Result<BlobReader<'a>> {
        let chunks = self.blob_chunks(id)?;
        if chunks.is_empty() && !self.has_blob(id)? {
            return Err(Error::Corrupt(format!("stored file {id} is missing")));
        }
        Ok(BlobReader::new(*self, chunks))
    }

    /// Total bytes of compressed chunk data.
    pub fn stored_bytes(&self) -> Result<u64> {
        Ok(self.conn.query_row(
            "SELECT COALESCE(SUM(LENGTH(data)), 0) FROM chunk",
            [],
            |r| r.get::<_, i64>(0),
        )? as u64)
    }
}

/// The deepest chain of deltas a read follows before calling the store damaged.
const MAX_DELTA_DEPTH: usize = 10_000;

/// zstd parameters for delta pieces: a window that covers the reference and the piece.
const DELTA_WINDOW_LOG: u32 = 24;

/// Compress `data` against `prefix` (zstd reference prefix with long-distance matching).
pub fn delta_compress(data: &[u8], prefix: &[u8], level: i32) -> std::io::Result<Vec<u8>> {
    use zstd::zstd_safe::{CCtx, CParameter};
    let err = |code: usize| std::io::Error::other(zstd::zstd_safe::get_error_name(code));
    let mut cctx = CCtx::create();
    cctx.set_parameter(CParameter::CompressionLevel(level))
        .map_err(err)?;
    cctx.set_parameter(CParameter::WindowLog(DELTA_WINDOW_LOG))
        .map_err(err)?;
    cctx.set_parameter(CParameter::EnableLongDistanceMatching(true))
        .map_err(err)?;
    cctx.ref_prefix(prefix).map_err(err)?;
    let mut out = Vec::with_capacity(zstd::zstd_safe::compress_bound(data.len()));
    cctx.compress2(&mut out, data).map_err(err)?;
    Ok(out)
}

/// Undo [`delta_compress`].
pub fn delta_decompress(frame: &[u8], prefix: &[u8], raw_len: usize) -> std::io::Result<Vec<u8>> {
    use zstd::zstd_safe::{DCtx, DParameter};
    let err = |code: usize| std::io::Error::other(zstd::zstd_safe::get_error_name(code));
    let mut dctx = DCtx::create();
    dctx.set_parameter(DParameter::WindowLogMax(DELTA_WINDOW_LOG + 1))
        .map_err(err)?;
    dctx.ref_prefix(prefix).map_err(err)?;
    let mut out = Vec::with_capacity(raw_len);
    dctx.decompress(&mut out, frame).map_err(err)?;
    Ok(out)
}

/// A sequence number as SQLite's signed integer; `u64::MAX` ("no upper bound") stays the
/// largest value rather than wrapping to -1.
fn sq(seq: u64) -> i64 {
    seq.min(i64::MAX as u64) as i64
}

fn blob32(r: &rusqlite::Row<'_>, idx: usize) -> rusqlite::Result<[u8; 32]> {
    let v: Vec<u8> = r.get(idx)?;
    v.try_into().map_err(|v: Vec<u8>| {
        rusqlite::Error::FromSqlConversionFailure(
            idx,
            rusqlite::types::Type::Blob,
            format!("expected 32 bytes, found {}", v.len()).into(),
        )
    })
}

fn cell_edit_row(table: &str, row: &str, r: &rusqlite::Row<'_>) -> rusqlite::Result<CellEditRow> {
    Ok(CellEditRow {
        table: table.to_string(),
        row: row.to_string(),
        column: r.get(0)?,
        seq: r.get::<_, i64>(1)? as u64,
        fix_idx: r.get::<_, i64>(2)? as u64,
        old: r.get(3)?,
        new: r.get(4)?,
    })
}

fn stored_commit(r: &rusqlite::Row<'_>) -> rusqlite::Result<StoredCommit> {
    Ok(StoredCommit {
        seq: r.get::<_, i64>(0)? as u64,
        id: CommitId::from_bytes(blob32(r, 1)?),
        body: r.get(2)?,
        signature: r.get(3)?,
    })
}

/// One all-or-nothing write. Dropped without [`WriteTx::commit`], nothing changes.
pub struct WriteTx<'s> {
    tx: rusqlite::Transaction<'s>,
}

impl WriteTx<'_> {
    /// Read access inside the transaction.
    pub fn read(&self) -> Reader<'_> {
        Reader { conn: &self.tx }
    }

    /// Make the write durable.
    pub fn commit(self) -> Result<()> {
        self.tx.commit().map_err(sql_err_busy)
    }

    /// Store a chunk unless one with the same id is there. `base` is the reference of a
    /// delta chunk (codec 2): a stored file and the byte range used as its prefix.
    pub fn put_chunk(
        &self,
        id: &ChunkId,
        raw_len: u64,
        codec: u8,
        base: Option<(BlobId, u64, u64)>,
        data: &[u8],
    ) -> Result<()> {
        let (blob, lo, hi) = match &base {
            Some((b, lo, hi)) => (
                Some(b.as_bytes().to_vec()),
                Some(*lo as i64),
                Some(*hi as i64),
            ),
            None => (None, None, None),
        };
        self.tx
            .prepare_cached(
                "INSERT OR IGNORE INTO chunk (id, raw_len, codec, base_blob, base_lo, base_hi, data)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            )?
            .execute(params![id.as_bytes(), raw_len as i64, codec as i64, blob, lo, hi, data])?;
        Ok(())
    }

    /// Record a blob made of `chunks`, unless it is stored already.
    pub fn put_blob(&self, id: &BlobId, n_bytes: u64, chunks: &[ChunkId]) -> Result<()> {
        if self.read().has_blob(id)? {
            return Ok(());
        }
        self.tx.execute(
            "INSERT INTO blob (id, n_bytes, n_chunks) VALUES (?1, ?2, ?3)",
            params![id.as_bytes(), n_bytes as i64, chunks.len() as i64],
        )?;
        let mut stmt = self
            .tx
            .prepare_cached("INSERT INTO blob_chunk (blob, idx, chunk) VALUES (?1, ?2, ?3)")?;
        for (i, c) in chunks.iter().enumerate() {
            stmt.execute(params![id.as_bytes(), i as i64, c.as_bytes()])?;
        }
        Ok(())
    }

    /// Append a commit and its derived index rows.
    pub fn append_commit(
        &self,
        body: &CommitBody,
        body_bytes: &[u8],
        id: &CommitId,
        signature: &[u8],
    ) -> Result<()> {
        self.tx.execute(
            "INSERT INTO commit_log (seq, id, body, signature) VALUES (?1, ?2, ?3, ?4)",
            params![body.seq as i64, id.as_bytes(), body_bytes, signature],
        )?;
        let rows = IndexRows::from_body(body);
        for (tbl, seq, extract) in &rows.extracts {
            self.tx.execute(
                "INSERT INTO extract_index (tbl, seq, extract) VALUES (?1, ?2, ?3)",
                params![tbl, *seq as i64, extract],
            )?;
        }
        let mut stmt = self.tx.prepare_cached(
            "INSERT INTO cell_edit (tbl, row_id, col, seq, fix_idx, old, new)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
        )?;
        for c in &rows.cells {
            stmt.execute(params![
                c.table,
                c.row,
                c.column,
                c.seq as i64,
                c.fix_idx as i64,
                c.old,
                c.new
            ])?;
        }
        for m in &rows.marks {
            self.tx.execute(
                "INSERT INTO mark (tbl, kind, target, seq, fix_idx) VALUES (?1, ?2, ?3, ?4, ?5)",
                params![m.table, m.kind, m.target, m.seq as i64, m.fix_idx as i64],
            )?;
        }
        for (name, seq, target) in &rows.tags {
            self.tx.execute(
                "INSERT INTO tag (name, seq, target_seq) VALUES (?1, ?2, ?3)",
                params![name, *seq as i64, *target as i64],
            )?;
        }
        for (tbl, seq, hash, n_rows) in &rows.versions {
            self.tx.execute(
                "INSERT INTO version_index (tbl, seq, hash, n_rows) VALUES (?1, ?2, ?3, ?4)",
                params![tbl, *seq as i64, hash, *n_rows as i64],
            )?;
        }
        Ok(())
    }

    /// Record a fix as pending, with an optional note for `status`.
    pub fn add_pending(&self, fix: &Fix, note: Option<&str>, now: &str) -> Result<i64> {
        let bytes = postcard::to_stdvec(fix)?;
        self.tx.execute(
            "INSERT INTO pending (tbl, fix, note, added_at) VALUES (?1, ?2, ?3, ?4)",
            params![fix.table, bytes, note, now],
        )?;
        Ok(self.tx.last_insert_rowid())
    }

    /// Drop every pending fix; returns how many there were.
    pub fn clear_pending(&self) -> Result<usize> {
        Ok(self.tx.execute("DELETE FROM pending", [])?)
    }

    /// Trust a signer (no change when trusted already).
    pub fn trust_signer(
        &self,
        key: &[u8; 32],
        name: &str,
        email: Option<&str>,
        now: &str,
    ) -> Result<bool> {
        let n = self.tx.execute(
            "INSERT OR IGNORE INTO signer (key, name, email, added_at) VALUES (?1, ?2, ?3, ?4)",
            params![key, name, email, now],
        )?;
        Ok(n > 0)
    }
}

/// Row ids in the index are plain text; this is the one conversion.
pub fn row_text(row: &RowId) -> &str {
    row.as_str()
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
