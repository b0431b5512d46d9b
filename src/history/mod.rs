//! Making commits, recording fixes, resolving revisions and reading history.
//!
//! Every operation here that writes does so in one store transaction: an ingest and its commit,
//! a recorded fix and its evidence files, or a commit of all pending fixes land whole or not at
//! all. Signing takes a [`CommitContext`] handed in by the caller; this module never reads keys,
//! the clock or the environment.

pub mod carry;
pub mod diff;
pub mod export;
pub mod profile;
pub mod report;
pub mod rules;
pub mod verify;
pub mod version;
pub mod why;

use crate::error::{Error, Result};
use crate::hash::{BlobId, ChunkId, CommitId, Digest};
use crate::ingest::{IngestOptions, IngestOutcome};
use crate::model::{
    Author, BODY_FORMAT, CellEdit, Change, CommitBody, Evidence, Fix, FixAction, FixRecord,
    IngestRecord, RowId, TableVersion,
};
use crate::signing::Signer;
use crate::store::{Reader, Store, StoredCommit, WriteTx};
use std::io::Read;
use std::ops::ControlFlow;
use std::path::{Path, PathBuf};
use version::{Version, VersionHashBuilder};

/// Who signs a commit, and when: handed in by the caller.
pub struct CommitContext<'a> {
    /// The private key.
    pub signer: &'a Signer,
    /// The signer's display name.
    pub name: String,
    /// The signer's e-mail.
    pub email: Option<String>,
    /// The time to record (RFC 3339, UTC).
    pub now: String,
}

/// A revision resolved to a commit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rev {
    /// Commit sequence.
    pub seq: u64,
    /// The raw extract, without fixes.
    pub raw: bool,
}

/// A commit that was just made.
#[derive(Debug, Clone)]
pub struct CommitOutcome {
    /// Sequence.
    pub seq: u64,
    /// Id.
    pub id: CommitId,
    /// The signed body.
    pub body: CommitBody,
}

/// Decode a stored commit's body, checking nothing.
pub fn decode(stored: &StoredCommit) -> Result<CommitBody> {
    CommitBody::decode(&stored.body)
        .map_err(|e| Error::Corrupt(format!("commit {} does not decode: {e}", stored.seq)))
}

/// Every commit body in sequence order.
pub fn log(reader: &Reader<'_>) -> Result<Vec<(StoredCommit, CommitBody)>> {
    reader
        .commits()?
        .into_iter()
        .map(|c| {
            let b = decode(&c)?;
            Ok((c, b))
        })
        .collect()
}

/// The ingest record of the ingest commit `seq`.
pub fn ingest_record(reader: &Reader<'_>, seq: u64) -> Result<IngestRecord> {
    let stored = reader
        .try_commit(seq)?
        .ok_or_else(|| Error::Corrupt(format!("commit {seq} is missing")))?;
    match decode(&stored)?.change {
        Change::Ingest(r) => Ok(r),
        _ => Err(Error::Corrupt(format!(
            "commit {seq} is indexed as an ingest but records something else"
        ))),
    }
}

/// Resolve what a user typed as a revision.
pub fn resolve(reader: &Reader<'_>, text: &str) -> Result<Rev> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let text = text.trim();
    match text {
        "latest" => {
            return Ok(Rev {
                seq: head,
                raw: false,
            });
        }
        "raw" => {
            return Ok(Rev {
                seq: head,
                raw: true,
            });
        }
        _ => {}
    }
    if let Some((_, target)) = reader.try_tag(text)? {
        return Ok(Rev {
            seq: target,
            raw: false,
        });
    }
    if !text.is_empty() && text.len() < 8 && text.bytes().all(|b| b.is_ascii_digit()) {
        let seq: u64 = text
            .parse()
            .map_err(|_| Error::UnknownRevision(text.into()))?;
        if seq == 0 || seq > head {
            return Err(Error::UnknownRevision(text.into()));
        }
        return Ok(Rev { seq, raw: false });
    }
    if text.len() >= 8 && text.len() <= 64 && text.bytes().all(|b| b.is_ascii_hexdigit()) {
        let prefix = text.to_ascii_lowercase();
        let found = reader.commits_with_prefix(&prefix)?;
        return match found.as_slice() {
            [] => Err(Error::UnknownRevision(text.into())),
            [(seq, _)] => Ok(Rev {
                seq: *seq,
                raw: false,
            }),
            many => Err(Error::AmbiguousRevision {
                prefix: text.into(),
                candidates: many
                    .iter()
                    .map(|(s, id)| format!("{s} ({})", id.short()))
                    .collect(),
            }),
        };
    }
    Err(Error::UnknownRevision(text.into()))
}

/// The version of `table` at a resolved revision.
pub fn version_at(reader: &Reader<'_>, table: &str, rev: Rev) -> Result<Version> {
    Version::load(reader, table, rev.seq, rev.raw)
}

/// Check a tag name: a letter first, then letters, digits, `_`, `-` or `.`; not a word or a
/// form that a revision already means.
pub fn check_tag_name(name: &str) -> Result<()> {
    let shape = !name.is_empty()
        && name.len() <= 64
        && name.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'));
    let reserved = matches!(name, "latest" | "raw")
        || (name.len() >= 8 && name.bytes().all(|b| b.is_ascii_hexdigit()));
    if shape && !reserved {
        Ok(())
    } else {
        Err(Error::Invalid(format!(
            "tag name '{name}' is not allowed: start with a letter, use letters, digits, '_', '-' or '.', and avoid 'latest', 'raw' and names made only of 8 or more hex digits"
        )))
    }
}

/// Name a commit with a signed tag. Tags never move: a name is used once.
pub fn tag(
    store: &mut Store,
    name: &str,
    rev: &str,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    check_tag_name(name)?;
    let tx = store.transaction()?;
    let reader = tx.read();
    if let Some((seq, target)) = reader.try_tag(name)? {
        return Err(Error::Invalid(format!(
            "tag '{name}' already names commit {target} (tagged in commit {seq}); tags never move, choose another name"
        )));
    }
    let resolved = resolve(&reader, rev)?;
    if resolved.raw {
        return Err(Error::Invalid(
            "'raw' is not a commit; tag the ingest commit by its number instead".into(),
        ));
    }
    let target = reader
        .try_commit(resolved.seq)?
        .ok_or_else(|| Error::UnknownRevision(rev.to_string()))?;
    let message = if message.trim().is_empty() {
        format!("tag {name}")
    } else {
        message.trim().to_string()
    };
    let change = Change::Tag(crate::model::TagRecord {
        name: name.to_string(),
        target: target.id,
        target_seq: target.seq,
    });
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    tx.commit()?;
    Ok(done)
}

/// Check a table name: letters, digits, `_`, `-` and `.`, starting with a letter or digit.
pub fn check_table_name(name: &str) -> Result<()> {
    let ok = !name.is_empty()
        && name.len() <= 64
        && name
            .chars()
            .next()
            .is_some_and(|c| c.is_ascii_alphanumeric())
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'));
    if ok {
        Ok(())
    } else {
        Err(Error::Invalid(format!(
            "table name '{name}' is not allowed: use letters, digits, '_', '-' or '.', starting with a letter or digit"
        )))
    }
}

pub(crate) fn seal(
    tx: &WriteTx<'_>,
    ctx: &CommitContext<'_>,
    message: &str,
    change: Change,
    versions: Vec<TableVersion>,
) -> Result<CommitOutcome> {
    let head = tx.read().head()?;
    let author = Author {
        name: ctx.name.clone(),
        email: ctx.email.clone(),
        key: ctx.signer.public_key(),
    };
    let body = CommitBody {
        format: BODY_FORMAT,
        seq: head.map(|(s, _)| s).unwrap_or(0) + 1,
        parent: head.map(|(_, id)| id),
        author,
        time: ctx.now.clone(),
        message: message.to_string(),
        change,
        versions,
    };
    let bytes = body.encode();
    let id = CommitBody::id_of(&bytes);
    let signature = ctx.signer.sign(id.as_bytes());
    tx.append_commit(&body, &bytes, &id, &signature)?;
    // The first signer of a store with no trusted key becomes trusted (recorded, not implied).
    if tx.read().signers()?.is_empty() {
        tx.trust_signer(&body.author.key, &ctx.name, ctx.email.as_deref(), &ctx.now)?;
    }
    Ok(CommitOutcome {
        seq: body.seq,
        id,
        body,
    })
}

/// Ingest a file as a new extract of a table: one signed commit.
pub fn ingest(
    store: &mut Store,
    path: &Path,
    opts: &IngestOptions,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<(CommitOutcome, IngestOutcome)> {
    check_table_name(&opts.table)?;
    let mut opts = opts.clone();
    let tx = store.transaction()?;
    {
        let reader = tx.read();
        if reader.pending()?.iter().any(|p| p.fix.table == opts.table) {
            return Err(Error::Invalid(format!(
                "table '{}' has pending fixes; commit or discard them before a new extract",
                opts.table
            )));
        }
        if let Some((seq, extract)) = reader.extract_at(&opts.table, u64::MAX)? {
            if opts.key.is_empty() {
                opts.key = ingest_record(&reader, seq)?.key;
            }
            let _ = extract;
        }
    }
    let outcome = crate::ingest::store_extract(&tx, path, &opts)?;
    if let Some((_, latest)) = tx.read().extract_at(&opts.table, u64::MAX)?
        && latest == outcome.record.extract
    {
        return Err(Error::Invalid(format!(
            "{} is already the newest extract of '{}' (same bytes, {})",
            path.display(),
            opts.table,
            latest.short()
        )));
    }
    let message = if message.trim().is_empty() {
        format!("ingest {}", outcome.record.file_name)
    } else {
        message.to_string()
    };
    let versions = vec![TableVersion {
        table: opts.table.clone(),
        hash: outcome.version,
        n_rows: outcome.record.n_rows,
    }];
    let done = seal(
        &tx,
        ctx,
        &message,
        Change::Ingest(outcome.record.clone()),
        versions,
    )?;
    tx.commit()?;
    Ok((done, outcome))
}

/// A fix as asked for on the command line, before it is checked.
#[derive(Debug, Clone)]
pub struct FixRequest {
    /// Table.
    pub table: String,
    /// What to do.
    pub action: FixAction,
    /// Why.
    pub why: String,
    /// Files to attach.
    pub evidence: Vec<PathBuf>,
    /// Who was consulted.
    pub consulted: Option<String>,
}

/// A fix that was recorded as pending.
#[derive(Debug, Clone)]
pub struct Recorded {
    /// The fix as stored.
    pub fix: Fix,
    /// A remark for the user (e.g. the cell already holds the value).
    pub note: Option<String>,
}

/// Check a fix against the table's latest version and record it as pending.
pub fn record_fix(store: &mut Store, req: FixRequest, now: &str) -> Result<Recorded> {
    if req.why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    let tx = store.transaction()?;
    let reader = tx.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    if reader.extract_at(&req.table, head)?.is_none() {
        return Err(Error::UnknownTable(req.table));
    }
    let version = Version::load(&reader, &req.table, head, false)?;
    let mut note = None;
    if let Some(col) = req.action.column() {
        version.col_idx(col)?;
        if version.def.key.iter().any(|k| k == col)
            && !matches!(req.action, FixAction::Distrust { .. })
        {
            return Err(Error::Invalid(format!(
                "column '{col}' is part of the key of '{}'; rows are named by it, so its values cannot be changed",
                req.table
            )));
        }
    }
    match &req.action {
        FixAction::Set { row, column, value } => {
            let (_, cells, _) =
                version
                    .find_row(&reader, row)?
                    .ok_or_else(|| Error::UnknownRow {
                        table: req.table.clone(),
                        row: row.to_string(),
                    })?;
            if &cells[version.col_idx(column)?] == value {
                note = Some(format!("row {row} {column} already holds this value"));
            }
        }
        FixAction::Exclude { row } => {
            version
                .find_row(&reader, row)?
                .ok_or_else(|| Error::UnknownRow {
                    table: req.table.clone(),
                    row: row.to_string(),
                })?;
        }
        FixAction::Recode { pairs, .. } => {
            if pairs.is_empty() {
                return Err(Error::Invalid(
                    "recode needs at least one from/to pair".into(),
                ));
            }
            if let Some((a, _)) = pairs.iter().find(|(a, b)| a == b) {
                return Err(Error::Invalid(format!(
                    "recode of '{a}' to itself changes nothing"
                )));
            }
        }
        FixAction::Missing { codes, .. } => {
            if codes.is_empty() {
                return Err(Error::Invalid("missing needs at least one --code".into()));
            }
        }
        FixAction::Distrust { .. } => {}
        FixAction::Rules { .. } => {
            return Err(Error::Invalid(
                "a rules file is adopted with 'emend rules TABLE FILE --why ...'".into(),
            ));
        }
    }
    let mut evidence = Vec::new();
    for path in &req.evidence {
        let (blob, n_bytes) = store_file(&tx, path)?;
        evidence.push(Evidence {
            name: path
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default(),
            blob,
            n_bytes,
        });
    }
    let fix = Fix {
        table: req.table,
        action: req.action,
        why: req.why.trim().to_string(),
        evidence,
        consulted: req.consulted.filter(|c| !c.trim().is_empty()),
        origins: Vec::new(),
    };
    tx.add_pending(&fix, None, now)?;
    tx.commit()?;
    Ok(Recorded { fix, note })
}

/// Store any file (evidence) content-addressed, streaming it in pieces.
pub fn store_file(tx: &WriteTx<'_>, path: &Path) -> Result<(BlobId, u64)> {
    let mut file = crate::ingest::open_input(path)?;
    let mut hasher = blake3::Hasher::new();
    let mut chunks = Vec::new();
    let mut n_bytes = 0u64;
    let mut buf = vec![0u8; crate::ingest::PIECE_SIZE];
    loop {
        let mut filled = 0;
        while filled < buf.len() {
            let n = file
                .read(&mut buf[filled..])
                .map_err(|e| Error::io(path, e))?;
            if n == 0 {
                break;
            }
            filled += n;
        }
        if filled == 0 {
            break;
        }
        let piece = &buf[..filled];
        hasher.update(piece);
        n_bytes += filled as u64;
        let id = ChunkId(Digest::of(piece));
        let compressed = zstd::bulk::compress(piece, 1).map_err(|e| Error::io(path, e))?;
        tx.put_chunk(&id, filled as u64, 1, None, &compressed)?;
        chunks.push(id);
        if filled < buf.len() {
            break;
        }
    }
    let id = BlobId(Digest(*hasher.finalize().as_bytes()));
    tx.put_blob(&id, n_bytes, &chunks)?;
    Ok((id, n_bytes))
}

/// Drop every pending fix. Returns how many were dropped.
pub fn discard(store: &mut Store) -> Result<usize> {
    let tx = store.transaction()?;
    let n = tx.clear_pending()?;
    tx.commit()?;
    Ok(n)
}

/// Apply the pending fixes of one table to a version, row by row, recording each cell changed.
fn resolve_fixes(
    reader: &Reader<'_>,
    version: &Version,
    fixes: &[&Fix],
) -> Result<(Vec<Vec<CellEdit>>, TableVersion)> {
    struct Prepared<'f> {
        fix: &'f Fix,
        col: Option<usize>,
        found: bool,
        /// For recode and missing: the values to look up, hashed (a map may hold thousands).
        lookup: std::collections::HashMap<&'f str, Option<&'f str>>,
    }
    let mut prepared: Vec<Prepared<'_>> = fixes
        .iter()
        .map(|f| {
            let lookup = match &f.action {
                // First match wins, as documented: keep the first pair for each `from`.
                FixAction::Recode { pairs, .. } => {
                    let mut m = std::collections::HashMap::new();
                    for (from, to) in pairs {
                        m.entry(from.as_str()).or_insert(Some(to.as_str()));
                    }
                    m
                }
                FixAction::Missing { codes, .. } => {
                    codes.iter().map(|c| (c.as_str(), None)).collect()
                }
                _ => std::collections::HashMap::new(),
            };
            Ok(Prepared {
                fix: f,
                col: f.action.column().map(|c| version.col_idx(c)).transpose()?,
                found: false,
                lookup,
            })
        })
        .collect::<Result<_>>()?;
    let mut edits: Vec<Vec<CellEdit>> = vec![Vec::new(); fixes.len()];
    let header = version.header().to_vec();
    let mut distrusted = version.distrusted().to_vec();
    for p in &prepared {
        if let (FixAction::Distrust { .. }, Some(c)) = (&p.fix.action, p.col) {
            distrusted[c] = true;
        }
    }
    let mut hash = VersionHashBuilder::new(&header);
    let mut n_rows = 0u64;
    let mut cells: Vec<Option<String>> = Vec::new();
    version.for_each_row(reader, |row| {
        cells.clear();
        cells.extend_from_slice(row.cells);
        let mut excluded = row.excluded;
        for (k, p) in prepared.iter_mut().enumerate() {
            let mut change = |col: usize, new: Option<String>, cells: &mut Vec<Option<String>>| {
                let old = std::mem::replace(&mut cells[col], new.clone());
                if old != new {
                    edits[k].push(CellEdit {
                        row: row.id.clone(),
                        column: header[col].clone(),
                        old,
                        new,
                    });
                }
            };
            match &p.fix.action {
                FixAction::Set { row: r, value, .. } => {
                    if r == row.id {
                        p.found = true;
                        change(
                            p.col.expect("set names a column"),
                            value.clone(),
                            &mut cells,
                        );
                    }
                }
                FixAction::Recode { .. } => {
                    let c = p.col.expect("recode names a column");
                    if let Some(v) = &cells[c]
                        && let Some(Some(to)) = p.lookup.get(v.as_str())
                    {
                        change(c, Some(to.to_string()), &mut cells);
                    }
                }
                FixAction::Missing { .. } => {
                    let c = p.col.expect("missing names a column");
                    if let Some(v) = &cells[c]
                        && p.lookup.contains_key(v.as_str())
                    {
                        change(c, None, &mut cells);
                    }
                }
                FixAction::Exclude { row: r } => {
                    if r == row.id {
                        p.found = true;
                        excluded = true;
                    }
                }
                FixAction::Distrust { .. } | FixAction::Rules { .. } => {}
            }
        }
        hash.row(row.id, excluded, &cells);
        n_rows += 1;
        Ok(ControlFlow::Continue(()))
    })?;
    for p in &prepared {
        if let FixAction::Set { row, .. } | FixAction::Exclude { row } = &p.fix.action
            && !p.found
        {
            return Err(Error::UnknownRow {
                table: version.table.clone(),
                row: row.to_string(),
            });
        }
    }
    Ok((
        edits,
        TableVersion {
            table: version.table.clone(),
            hash: hash.finish(&header, &distrusted),
            n_rows,
        },
    ))
}

/// Commit every pending fix as one signed commit.
pub fn commit_pending(
    store: &mut Store,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    if message.trim().is_empty() {
        return Err(Error::Invalid(
            "a commit needs a message: -m \"...\"".into(),
        ));
    }
    let tx = store.transaction()?;
    let reader = tx.read();
    let pending = reader.pending()?;
    if pending.is_empty() {
        return Err(Error::NothingPending);
    }
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let mut tables: Vec<&str> = Vec::new();
    for p in &pending {
        if !tables.contains(&p.fix.table.as_str()) {
            tables.push(&p.fix.table);
        }
    }
    let mut records: Vec<Option<FixRecord>> = vec![None; pending.len()];
    let mut versions = Vec::new();
    for table in tables {
        let idx: Vec<usize> = (0..pending.len())
            .filter(|&i| pending[i].fix.table == table)
            .collect();
        let fixes: Vec<&Fix> = idx.iter().map(|&i| &pending[i].fix).collect();
        let version = Version::load(&reader, table, head, false)?;
        let (edits, tv) = resolve_fixes(&reader, &version, &fixes)?;
        for (i, e) in idx.into_iter().zip(edits) {
            records[i] = Some(FixRecord {
                fix: pending[i].fix.clone(),
                edits: e,
            });
        }
        versions.push(tv);
    }
    let records: Vec<FixRecord> = records
        .into_iter()
        .map(|r| r.expect("every pending fix belongs to one table"))
        .collect();
    let done = seal(&tx, ctx, message.trim(), Change::Fixes(records), versions)?;
    tx.clear_pending()?;
    tx.commit()?;
    Ok(done)
}

/// Vouch for another key in a signed commit (key rotation, a new colleague): from this commit
/// on its commits verify as trusted, also against an auditor's key list that holds the signer.
pub fn trust_key(
    store: &mut Store,
    key: &[u8; 32],
    name: &str,
    email: Option<&str>,
    why: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    if why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    if name.trim().is_empty() {
        return Err(Error::Invalid(
            "--name is empty: say whose key this is".into(),
        ));
    }
    if ed25519_dalek::VerifyingKey::from_bytes(key).is_err() {
        return Err(Error::Key("that is not an Ed25519 public key".into()));
    }
    let tx = store.transaction()?;
    let signer = ctx.signer.public_key();
    if !tx.read().signers()?.iter().any(|s| s.key == signer) {
        return Err(Error::Key(
            "your own key is not trusted by this store, so it cannot vouch for another".into(),
        ));
    }
    let change = Change::Trust(crate::model::TrustRecord {
        key: *key,
        name: name.trim().to_string(),
        email: email.map(str::to_string),
        why: why.trim().to_string(),
    });
    let message = format!("trust {}: {}", name.trim(), why.trim());
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    tx.trust_signer(key, name.trim(), email, &ctx.now)?;
    tx.commit()?;
    Ok(done)
}

/// Trust a signer's key in this store.
pub fn trust(
    store: &mut Store,
    key: &[u8; 32],
    name: &str,
    email: Option<&str>,
    now: &str,
) -> Result<bool> {
    let tx = store.transaction()?;
    let added = tx.trust_signer(key, name, email, now)?;
    tx.commit()?;
    Ok(added)
}

/// A row id as the user typed it, for a table.
pub fn parse_row(reader: &Reader<'_>, table: &str, text: &str) -> Result<RowId> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let (seq, _) = reader
        .extract_at(table, head)?
        .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
    let def = ingest_record(reader, seq)?;
    Ok(RowId::parse_user(text, def.key.len()))
}
