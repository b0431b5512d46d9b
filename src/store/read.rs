//! Every read query: commits, extracts, cell edits (from the bodies), the mark index, tags, pending fixes,
//! signers, chunks and stored files. [`Reader`] works both on an open store and inside a write
//! transaction.

use super::blob::{BlobReader, ChunkCache};
use super::codec::{self, Codec};
use super::index::{CellEditRow, IndexRows, MarkRow};
use crate::error::{Error, Result};
use crate::hash::{BlobId, ChunkId, CommitId};
use crate::model::{Conflict, Fix, Recorder, RowId};
use crate::table::row_map::{MapBytes, RowMap};
use rusqlite::{Connection, OptionalExtension, params};
use std::path::Path;
use std::rc::Rc;

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

/// A stored piece exactly as the store holds it (compressed, with its reference when it is a
/// delta): what a team store sends and receives, so both ends hold the same bytes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct StoredChunk {
    /// BLAKE3 of the uncompressed bytes.
    pub id: ChunkId,
    /// Uncompressed length.
    pub raw_len: u64,
    /// The codec number (see [`crate::store::Codec`]).
    pub codec: i64,
    /// The reference of a delta: an earlier stored file and a byte range of it.
    pub base: Option<(BlobId, u64, u64)>,
    /// The stored (compressed) bytes.
    pub data: Vec<u8>,
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
    /// Who recorded it (none when recorded without an identity).
    pub by: Option<Recorder>,
    /// Whether it answers a carried conflict.
    pub resolves_conflict: bool,
}

/// A carried conflict kept open, with its number for `emend resolve`.
#[derive(Debug, Clone)]
pub struct OpenConflict {
    /// Its id (the number `status` shows).
    pub id: i64,
    /// The conflict.
    pub conflict: Conflict,
    /// When carry found it.
    pub added_at: String,
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
    /// The trust commit that vouched for the key; 0 for the store's roots.
    pub since_seq: u64,
    /// The first of the key's commits no longer trusted, when trust was withdrawn.
    pub revoked_from: Option<u64>,
}

/// The store's signers with the commits each is trusted at.
#[derive(Debug, Clone, Default)]
pub struct TrustList(pub Vec<SignerRecord>);

impl TrustList {
    /// Whether `key`'s commit `seq` is trusted by the store.
    pub fn trusts(&self, key: &[u8; 32], seq: u64) -> bool {
        self.0.iter().any(|s| s.key == *key && s.trusts_at(seq))
    }
}

impl SignerRecord {
    /// Whether the key's commit `seq` is trusted: after the commit that vouched for it (any
    /// commit for a root), and not after one that withdrew trust.
    pub fn trusts_at(&self, seq: u64) -> bool {
        (self.since_seq == 0 || seq > self.since_seq) && self.revoked_from.is_none_or(|r| seq < r)
    }
}

/// Read queries, usable both on a store and inside a write transaction.
#[derive(Clone, Copy)]
pub struct Reader<'a> {
    pub(super) conn: &'a Connection,
}

impl<'a> Reader<'a> {
    /// Schema objects in the file that emend did not make, or that differ from what it
    /// makes (see `schema_check`): each named.
    pub fn foreign_objects(&self) -> Result<Vec<String>> {
        super::schema_check::foreign_objects(self.conn, false)
    }

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

    /// Cell edits of `table` with `after < seq <= upto`, in the order they were made. The
    /// signed bodies are the index: the commits that changed the table are found by the
    /// version index, and their cells unpacked.
    pub fn cell_edits(&self, table: &str, after: u64, upto: u64) -> Result<Vec<CellEditRow>> {
        self.edits_where(table, after, upto, &|_, _| true)
    }

    /// The cell edits of `table`'s fix commits in `after < seq <= upto` that `keep` accepts,
    /// in the order they were made.
    fn edits_where(
        &self,
        table: &str,
        after: u64,
        upto: u64,
        keep: &dyn Fn(&str, &str) -> bool,
    ) -> Result<Vec<CellEditRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT c.seq, c.body FROM commit_log c JOIN version_index v ON v.seq = c.seq
             WHERE v.tbl = ?1 AND c.seq > ?2 AND c.seq <= ?3 ORDER BY c.seq",
        )?;
        let rows = stmt.query_map(params![table, sq(after), sq(upto)], |r| {
            Ok((r.get::<_, i64>(0)? as u64, r.get::<_, Vec<u8>>(1)?))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (seq, bytes) = row?;
            let body = crate::model::CommitBody::decode_cells_where(&bytes, keep).map_err(|e| {
                Error::Tampered(format!("commit {seq}'s body does not decode ({e})"))
            })?;
            let crate::model::Change::Fixes(records) = body.change else {
                continue;
            };
            for (fix_idx, rec) in records.into_iter().enumerate() {
                if rec.fix.table != table {
                    continue;
                }
                for e in rec.edits {
                    out.push(CellEditRow {
                        table: table.to_string(),
                        row: e.row.0,
                        column: e.column,
                        seq,
                        fix_idx: fix_idx as u64,
                        old: e.old,
                        new: e.new,
                    });
                }
            }
        }
        Ok(out)
    }

    /// Marks of `table` with `after < seq <= upto`, leaving out the marks of fixes withdrawn
    /// by `upto`.
    pub fn marks(&self, table: &str, after: u64, upto: u64) -> Result<Vec<MarkRow>> {
        let mut stmt = self.conn.prepare_cached(
            "SELECT kind, target, seq, fix_idx FROM mark
             WHERE tbl = ?1 AND seq > ?2 AND seq <= ?3 AND NOT EXISTS (
                 SELECT 1 FROM mark w WHERE w.tbl = mark.tbl AND w.kind = 'withdraw'
                 AND w.target = printf('%d.%d', mark.seq, mark.fix_idx + 1) AND w.seq <= ?3)
             ORDER BY seq, fix_idx",
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

    /// The version hash and row count last recorded for `table` at or before commit `upto`.
    pub fn recorded_version(
        &self,
        table: &str,
        upto: u64,
    ) -> Result<Option<(crate::hash::VersionHash, u64)>> {
        Ok(self
            .conn
            .prepare_cached(
                "SELECT hash, n_rows FROM version_index WHERE tbl = ?1 AND seq <= ?2
                 ORDER BY seq DESC LIMIT 1",
            )?
            .query_row(params![table, sq(upto)], |r| {
                Ok((blob32(r, 0)?, r.get::<_, i64>(1)? as u64))
            })
            .optional()?
            .map(|(h, n)| (crate::hash::VersionHash::from_bytes(h), n)))
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
        self.edits_where(table, after, upto, &|r, c| r == row && c == column)
    }

    /// Edits of every cell of one row with `after < seq <= upto`, oldest first.
    pub fn row_history(
        &self,
        table: &str,
        row: &str,
        after: u64,
        upto: u64,
    ) -> Result<Vec<CellEditRow>> {
        self.edits_where(table, after, upto, &|r, _| r == row)
    }

    /// Marks naming one target (a row id or a column) with `after < seq <= upto`, leaving out
    /// the marks of fixes withdrawn by then.
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
             AND NOT EXISTS (
                 SELECT 1 FROM mark w WHERE w.tbl = mark.tbl AND w.kind = 'withdraw'
                 AND w.target = printf('%d.%d', mark.seq, mark.fix_idx + 1) AND w.seq <= ?5)
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
            .prepare("SELECT id, fix, added_at, note, author_key, author_name, reopens IS NOT NULL FROM pending ORDER BY id")?;
        let rows = stmt.query_map([], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, Vec<u8>>(1)?,
                r.get::<_, String>(2)?,
                r.get::<_, Option<String>>(3)?,
                r.get::<_, Option<Vec<u8>>>(4)?,
                r.get::<_, Option<String>>(5)?,
                r.get::<_, bool>(6)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (id, bytes, added_at, note, key, name, resolves_conflict) = row?;
            let fix: Fix = postcard::from_bytes(&bytes)
                .map_err(|e| Error::Corrupt(format!("pending fix {id} does not decode: {e}")))?;
            let by = match (key, name) {
                (Some(k), Some(name)) => Some(Recorder {
                    key: k.try_into().map_err(|_| {
                        Error::Corrupt(format!(
                            "pending fix {id}: its recorder's key is not 32 bytes"
                        ))
                    })?,
                    name,
                }),
                _ => None,
            };
            out.push(PendingFix {
                id,
                fix,
                added_at,
                note,
                by,
                resolves_conflict,
            });
        }
        Ok(out)
    }

    /// Carried conflicts still open, in the order carry found them.
    pub fn conflicts(&self) -> Result<Vec<OpenConflict>> {
        let mut stmt = self
            .conn
            .prepare("SELECT id, conflict, added_at FROM open_conflict ORDER BY id")?;
        let rows = stmt.query_map([], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, Vec<u8>>(1)?,
                r.get::<_, String>(2)?,
            ))
        })?;
        let mut out = Vec::new();
        for row in rows {
            let (id, bytes, added_at) = row?;
            let conflict: Conflict = postcard::from_bytes(&bytes)
                .map_err(|e| Error::Corrupt(format!("open conflict {id} does not decode: {e}")))?;
            out.push(OpenConflict {
                id,
                conflict,
                added_at,
            });
        }
        Ok(out)
    }

    /// Trusted signers.
    pub fn signers(&self) -> Result<Vec<SignerRecord>> {
        let mut stmt = self
            .conn
            .prepare("SELECT key, name, email, added_at, since_seq, revoked_from FROM signer ORDER BY added_at, name")?;
        let rows = stmt.query_map([], |r| {
            Ok(SignerRecord {
                key: blob32(r, 0)?,
                name: r.get(1)?,
                email: r.get(2)?,
                added_at: r.get(3)?,
                since_seq: r.get::<_, i64>(4)? as u64,
                revoked_from: r.get::<_, Option<i64>>(5)?.map(|s| s as u64),
            })
        })?;
        Ok(rows.collect::<rusqlite::Result<_>>()?)
    }

    /// Whether this store trusts `key`'s commit `seq` (see [`SignerRecord::trusts_at`]).
    pub fn trusted_at(&self, key: &[u8; 32], seq: u64) -> Result<bool> {
        Ok(self.trust_list()?.trusts(key, seq))
    }

    /// The signers, to ask of many commits whether each is trusted.
    pub fn trust_list(&self) -> Result<TrustList> {
        Ok(TrustList(self.signers()?))
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

    /// A piece as stored (compressed), for sending it elsewhere unchanged.
    pub fn stored_chunk(&self, id: &ChunkId) -> Result<Option<StoredChunk>> {
        type Row = (i64, i64, Option<Vec<u8>>, Option<i64>, Option<i64>, Vec<u8>);
        let row: Option<Row> = self
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
            .optional()?;
        let Some((raw_len, codec, base_blob, lo, hi, data)) = row else {
            return Ok(None);
        };
        let base = match (base_blob, lo, hi) {
            (Some(b), Some(lo), Some(hi)) => {
                let b: [u8; 32] = b.try_into().map_err(|_| {
                    Error::Corrupt(format!("chunk {id} names a reference that is not an id"))
                })?;
                Some((BlobId::from_bytes(b), lo as u64, hi as u64))
            }
            _ => None,
        };
        Ok(Some(StoredChunk {
            id: *id,
            raw_len: raw_len as u64,
            codec,
            base,
            data,
        }))
    }

    /// A value of the store's own settings (`store_meta`), if set.
    pub fn meta(&self, name: &str) -> Result<Option<String>> {
        Ok(self
            .conn
            .prepare_cached("SELECT value FROM store_meta WHERE name = ?1")?
            .query_row(params![name], |r| r.get(0))
            .optional()?)
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

    /// A chunk's uncompressed bytes, appended to `out`, checked against its hash.
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
        let raw_len_usize = raw_len.max(0) as usize;
        let raw = match Codec::from_code(codec) {
            Some(plain @ (Codec::Stored | Codec::Zstd)) => {
                codec::decode_plain(plain, data, raw_len_usize)
                    .map_err(|e| bad(format!("does not decompress: {e}")))?
            }
            Some(Codec::Delta) => {
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
                codec::delta_decompress(&data, &prefix, raw_len_usize)
                    .map_err(|e| bad(format!("does not decompress against its reference: {e}")))?
            }
            None => return Err(bad(format!("has unknown codec {codec}"))),
        };
        if raw.len() as i64 != raw_len {
            return Err(bad(format!(
                "holds {} bytes, its record says {raw_len}",
                raw.len()
            )));
        }
        if ChunkId(crate::hash::Digest::of(&raw)) != *id {
            return Err(Error::Tampered(format!(
                "stored piece {} does not match its hash: the stored bytes were changed",
                id.short()
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
        Ok(BlobReader::new(*self, *id, chunks))
    }

    /// The row map kept with ingest commit `seq`, opened for lookups (none for an extract
    /// ingested before row maps existed).
    pub fn row_map(&self, seq: u64) -> Result<Option<RowMap<StoredMap<'a>>>> {
        let exists = self
            .conn
            .prepare_cached("SELECT 1 FROM row_map WHERE seq = ?1")?
            .query_row(params![sq(seq)], |_| Ok(()))
            .optional()?;
        if exists.is_none() {
            return Ok(None);
        }
        let blob = self
            .conn
            .blob_open(rusqlite::MAIN_DB, "row_map", "data", sq(seq), true)?;
        RowMap::open(StoredMap(blob))
            .map(Some)
            .map_err(|e| Error::Tampered(format!("the row map of commit {seq}: {e}")))
    }

    /// The whole row map of ingest commit `seq`, for `verify` to compare.
    pub fn row_map_bytes(&self, seq: u64) -> Result<Option<Vec<u8>>> {
        Ok(self
            .conn
            .prepare_cached("SELECT data FROM row_map WHERE seq = ?1")?
            .query_row(params![sq(seq)], |r| r.get(0))
            .optional()?)
    }

    /// The commits that have a row map.
    pub fn row_map_seqs(&self) -> Result<Vec<u64>> {
        let mut stmt = self
            .conn
            .prepare_cached("SELECT seq FROM row_map ORDER BY seq")?;
        let rows = stmt.query_map([], |r| r.get::<_, i64>(0))?;
        Ok(rows
            .map(|r| r.map(|s| s as u64))
            .collect::<rusqlite::Result<_>>()?)
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

/// A stored row map, read in place a few bytes at a time (SQLite's incremental blob reads).
pub struct StoredMap<'a>(rusqlite::blob::Blob<'a>);

impl MapBytes for StoredMap<'_> {
    fn read_at(&self, at: u64, buf: &mut [u8]) -> std::result::Result<(), String> {
        let at = usize::try_from(at).map_err(|_| "offset out of range".to_string())?;
        if at
            .checked_add(buf.len())
            .is_none_or(|end| end > self.0.len())
        {
            return Err(format!("the row map ends before byte {}", at + buf.len()));
        }
        self.0.read_at_exact(buf, at).map_err(|e| e.to_string())
    }
}

/// The deepest chain of deltas a read follows before calling the store damaged.
const MAX_DELTA_DEPTH: usize = 10_000;

/// A sequence number as SQLite's signed integer; `u64::MAX` ("no upper bound") stays the
/// largest value rather than wrapping to -1.
pub(super) fn sq(seq: u64) -> i64 {
    seq.min(i64::MAX as u64) as i64
}

pub(super) fn blob32(r: &rusqlite::Row<'_>, idx: usize) -> rusqlite::Result<[u8; 32]> {
    let v: Vec<u8> = r.get(idx)?;
    v.try_into().map_err(|v: Vec<u8>| {
        rusqlite::Error::FromSqlConversionFailure(
            idx,
            rusqlite::types::Type::Blob,
            format!("expected 32 bytes, found {}", v.len()).into(),
        )
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

/// Row ids in the index are plain text; this is the one conversion.
pub fn row_text(row: &RowId) -> &str {
    row.as_str()
}
