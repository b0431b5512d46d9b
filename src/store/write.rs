//! The write transaction: chunks, stored files, commits with their derived index rows, pending
//! fixes and trusted signers. Dropped without [`WriteTx::commit`], nothing changes.

use super::codec::EncodedPiece;
use super::index::IndexRows;
use super::read::{Reader, StoredChunk};
use crate::error::{Error, Result};
use crate::hash::{BlobId, ChunkId, CommitId};
use crate::model::{CommitBody, Conflict, Fix, Recorder};
use rusqlite::{OptionalExtension, params};

/// One all-or-nothing write. Dropped without [`WriteTx::commit`], nothing changes.
pub struct WriteTx<'s> {
    pub(super) tx: rusqlite::Transaction<'s>,
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

    /// Store an encoded piece unless one with the same id is there (a piece without data is
    /// one the store already holds).
    pub fn put_piece(&self, piece: &EncodedPiece) -> Result<()> {
        let Some(data) = &piece.data else {
            return Ok(());
        };
        let (blob, lo, hi) = match &piece.base {
            Some(b) => (
                Some(b.blob.as_bytes().to_vec()),
                Some(b.lo as i64),
                Some(b.hi as i64),
            ),
            None => (None, None, None),
        };
        self.tx
            .prepare_cached(
                "INSERT OR IGNORE INTO chunk (id, raw_len, codec, base_blob, base_lo, base_hi, data)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            )?
            .execute(params![
                piece.id.as_bytes(),
                piece.raw_len as i64,
                piece.codec.code(),
                blob,
                lo,
                hi,
                data
            ])?;
        Ok(())
    }

    /// Store a piece received as stored elsewhere (see [`Reader::stored_chunk`]), unless one
    /// with the same id is here. Its bytes are checked when it is read, like every piece.
    pub fn put_stored_chunk(&self, c: &StoredChunk) -> Result<()> {
        let (blob, lo, hi) = match &c.base {
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
            .execute(params![
                c.id.as_bytes(),
                c.raw_len as i64,
                c.codec,
                blob,
                lo,
                hi,
                c.data
            ])?;
        Ok(())
    }

    /// Set a value of the store's own settings (`store_meta`).
    pub fn set_meta(&self, name: &str, value: &str) -> Result<()> {
        self.tx.execute(
            "INSERT INTO store_meta (name, value) VALUES (?1, ?2)
             ON CONFLICT (name) DO UPDATE SET value = excluded.value",
            params![name, value],
        )?;
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

    /// Keep the row map of the extract that ingest commit `seq` adds to `table`, in place of
    /// the map of the table's earlier extract: the newest extract is the one looked up all day,
    /// and a month's map costs as much as the month's whole delta, so older extracts are read
    /// in full when asked for (their versions are rebuilt the same either way).
    pub fn put_row_map(&self, table: &str, seq: u64, map: &[u8]) -> Result<()> {
        self.tx.execute(
            "DELETE FROM row_map WHERE seq IN
                 (SELECT seq FROM extract_index WHERE tbl = ?1 AND seq < ?2)",
            params![table, seq as i64],
        )?;
        self.tx.execute(
            "INSERT INTO row_map (seq, data) VALUES (?1, ?2)",
            params![seq as i64, map],
        )?;
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

    /// Append a commit row as it was found elsewhere, without index rows: for an audit copy of
    /// a team store, where a body that does not decode is kept for `verify` to report.
    pub fn append_raw_commit(
        &self,
        seq: u64,
        id: &CommitId,
        body: &[u8],
        signature: &[u8],
    ) -> Result<()> {
        self.tx.execute(
            "INSERT INTO commit_log (seq, id, body, signature) VALUES (?1, ?2, ?3, ?4)",
            params![seq as i64, id.as_bytes(), body, signature],
        )?;
        Ok(())
    }

    /// Record a fix as pending, with an optional note for `status`.
    pub fn add_pending(
        &self,
        fix: &Fix,
        note: Option<&str>,
        now: &str,
        by: Option<&Recorder>,
    ) -> Result<i64> {
        self.add_pending_resolving(fix, note, now, by, None)
    }

    /// Record a pending fix that resolves a carried conflict: discarding it opens the conflict
    /// again.
    pub fn add_pending_resolving(
        &self,
        fix: &Fix,
        note: Option<&str>,
        now: &str,
        by: Option<&Recorder>,
        reopens: Option<&Conflict>,
    ) -> Result<i64> {
        let bytes = postcard::to_stdvec(fix)?;
        let reopens = reopens.map(postcard::to_stdvec).transpose()?;
        self.tx.execute(
            "INSERT INTO pending (tbl, fix, note, added_at, author_key, author_name, reopens)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
            params![
                fix.table,
                bytes,
                note,
                now,
                by.map(|b| b.key.to_vec()),
                by.map(|b| b.name.as_str()),
                reopens
            ],
        )?;
        Ok(self.tx.last_insert_rowid())
    }

    /// Drop every pending fix; returns how many there were. Conflicts they resolved open again.
    pub fn clear_pending(&self) -> Result<usize> {
        let pending = self.read().pending()?;
        for p in &pending {
            self.drop_pending(p.id)?;
        }
        Ok(pending.len())
    }

    /// Drop one pending fix by its id; whether it was there. A conflict it resolved opens again.
    pub fn drop_pending(&self, id: i64) -> Result<bool> {
        let reopens: Option<Option<Vec<u8>>> = self
            .tx
            .query_row("SELECT reopens FROM pending WHERE id = ?1", [id], |r| {
                r.get(0)
            })
            .optional()?;
        if let Some(Some(bytes)) = reopens {
            let conflict: Conflict = postcard::from_bytes(&bytes).map_err(|e| {
                Error::Corrupt(format!(
                    "pending fix {id}: its conflict does not decode: {e}"
                ))
            })?;
            let at: String =
                self.tx
                    .query_row("SELECT added_at FROM pending WHERE id = ?1", [id], |r| {
                        r.get(0)
                    })?;
            self.add_conflict(&conflict, &at)?;
        }
        Ok(self.tx.execute("DELETE FROM pending WHERE id = ?1", [id])? == 1)
    }

    /// Drop pending fixes once committed (their conflicts are answered for good).
    pub fn commit_pending_rows(&self, ids: &[i64]) -> Result<()> {
        for id in ids {
            self.tx.execute("DELETE FROM pending WHERE id = ?1", [id])?;
        }
        Ok(())
    }

    /// Keep a carried conflict open.
    pub fn add_conflict(&self, conflict: &Conflict, now: &str) -> Result<i64> {
        let bytes = postcard::to_stdvec(conflict)?;
        self.tx.execute(
            "INSERT INTO open_conflict (tbl, conflict, added_at) VALUES (?1, ?2, ?3)",
            params![conflict.fix.table, bytes, now],
        )?;
        Ok(self.tx.last_insert_rowid())
    }

    /// Close a carried conflict (its answer is recorded as a pending fix, or deferred).
    pub fn drop_conflict(&self, id: i64) -> Result<bool> {
        Ok(self
            .tx
            .execute("DELETE FROM open_conflict WHERE id = ?1", [id])?
            == 1)
    }

    /// Trust a signer (no change when it is listed already): a root of the store's trust when
    /// `since_seq` is 0, else from after that trust commit on.
    pub fn trust_signer(
        &self,
        key: &[u8; 32],
        name: &str,
        email: Option<&str>,
        now: &str,
        since_seq: u64,
    ) -> Result<bool> {
        let n = self.tx.execute(
            "INSERT OR IGNORE INTO signer (key, name, email, added_at, since_seq)
             VALUES (?1, ?2, ?3, ?4, ?5)",
            params![key, name, email, now, since_seq as i64],
        )?;
        Ok(n > 0)
    }

    /// Withdraw trust from a signer's commits from `seq` on.
    pub fn revoke_signer(&self, key: &[u8; 32], seq: u64) -> Result<()> {
        self.tx.execute(
            "UPDATE signer SET revoked_from = ?2 WHERE key = ?1 AND revoked_from IS NULL",
            params![key, seq as i64],
        )?;
        Ok(())
    }
}

/// A write refused because another process holds the lock becomes [`Error::Busy`].
pub(super) fn sql_err_busy(e: rusqlite::Error) -> Error {
    if let rusqlite::Error::SqliteFailure(f, _) = &e
        && matches!(
            f.code,
            rusqlite::ErrorCode::DatabaseBusy | rusqlite::ErrorCode::DatabaseLocked
        )
    {
        return Error::Busy;
    }
    Error::from(e)
}
