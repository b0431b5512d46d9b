//! Recording fixes as pending (checked against the latest version; evidence stored
//! content-addressed) and committing them: one streaming pass per table resolves each fix to
//! the exact cells it changes and computes the new version hash.

use super::apply::{FixApplier, RuleBook};
use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::hash::{BlobId, Digest};
use crate::ingest::{Input, InputOptions};
use crate::model::edit::Rows;
use crate::model::{CellEdit, Change, Evidence, Fix, FixAction, FixRecord, RowId, TableVersion};
use crate::query::Version;
use crate::store::{PIECE_SIZE, PieceEncoder, Reader, Store, WriteTx};
use crate::table::VersionHashBuilder;
use std::io::Read;
use std::ops::ControlFlow;
use std::path::{Path, PathBuf};

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
    /// Record the fix even when it changes (or chooses) nothing in the latest version.
    pub allow_empty: bool,
    /// A rule of the rules in force that the new values may break on purpose (`ph.hard`);
    /// named in the recorded reason.
    pub despite: Option<String>,
    /// Who records it: only they may commit it.
    pub by: Option<crate::model::Recorder>,
}

/// What a fix would do to the latest version, found in one pass when it is recorded.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Preview {
    /// Rows it chooses (for fixes that choose rows).
    pub rows: u64,
    /// Cells it changes.
    pub cells: u64,
    /// The first few changes: row, value before, value after.
    pub samples: Vec<(RowId, Option<String>, Option<String>)>,
}

/// Changes listed in a [`Preview`].
pub const PREVIEW_SAMPLES: usize = 3;

/// The committed fix that `seq`.`fix` (1-based) names.
pub fn committed_fix(reader: &Reader<'_>, seq: u64, fix: u64) -> Result<FixRecord> {
    let stored = reader.try_commit(seq)?.ok_or_else(|| {
        Error::Invalid(format!("there is no commit {seq}; 'emend log' lists them"))
    })?;
    let Change::Fixes(list) = crate::query::decode(&stored)?.change else {
        return Err(Error::Invalid(format!(
            "commit {seq} records no fixes (it is an ingest, a tag or a trust); 'emend log' numbers the fixes as {seq}.1, {seq}.2, …"
        )));
    };
    let n = list.len();
    fix.checked_sub(1)
        .and_then(|i| list.into_iter().nth(i as usize))
        .ok_or_else(|| {
            Error::Invalid(format!(
                "commit {seq} holds {n} fixes; there is no fix {seq}.{fix}"
            ))
        })
}

/// Prepares each fix against a header, withdrawals with the fix they withdraw.
fn appliers<'f>(
    fixes: &[&'f Fix],
    originals: &'f [Option<FixRecord>],
    header: &[String],
    book: &'f RuleBook,
) -> Result<Vec<FixApplier<'f>>> {
    fixes
        .iter()
        .zip(originals)
        .map(|(f, o)| match o {
            Some(original) => Ok(FixApplier::reversing(f, original, header)),
            None => FixApplier::new(f, header, book),
        })
        .collect()
}

/// The fixes withdrawals name, loaded (None for other fixes).
fn withdrawn(reader: &Reader<'_>, fixes: &[&Fix]) -> Result<Vec<Option<FixRecord>>> {
    fixes
        .iter()
        .map(|f| match f.action {
            FixAction::Withdraw { seq, fix } => committed_fix(reader, seq, fix).map(Some),
            _ => Ok(None),
        })
        .collect()
}

/// A new value that breaks a rule in force: the row, the rule id and what is wrong.
type Broken = (RowId, String, String);

/// One pass over `version` applying `fix` alone: what it would change, or why it cannot,
/// and the first new value that breaks one of `rules` (when given).
fn preview(
    reader: &Reader<'_>,
    version: &Version,
    fix: &Fix,
    rules: Option<&crate::checks::RuleSet>,
) -> Result<(Preview, Option<Broken>)> {
    let mut broken: Option<Broken> = None;
    let header = version.header().to_vec();
    let originals = withdrawn(reader, &[fix])?;
    let book = RuleBook::load(reader, [fix])?;
    let mut a = appliers(&[fix], &originals, &header, &book)?.remove(0);
    let mut out = Preview::default();
    let mut cells: Vec<Option<String>> = Vec::new();
    // Every row, excluded or not, as committing does: the counts said here are those the
    // commit signs. A fix of listed rows reads only those rows, through the row map.
    let listed = match &fix.action {
        FixAction::Edit { rows, .. }
        | FixAction::ExcludeRows { rows, .. }
        | FixAction::Keep { rows, .. }
        | FixAction::Note { rows, .. } => match rows {
            crate::model::edit::Rows::Listed(ids) => Some(ids.as_slice()),
            _ => None,
        },
        _ => None,
    };
    let visit = |row: &crate::query::RowView<'_>| {
        cells.clear();
        cells.extend_from_slice(row.cells);
        let mut excluded = row.excluded;
        let before = a.n_chosen();
        a.apply(row.id, &mut cells, &mut excluded, |col, old, new| {
            if broken.is_none()
                && let (Some(rules), Some(v)) = (rules, new.as_deref())
                && let Some((id, why)) = rules.breaks(&header[col], v)
            {
                broken = Some((row.id.clone(), id, why));
            }
            out.cells += 1;
            if out.samples.len() < PREVIEW_SAMPLES {
                out.samples.push((row.id.clone(), old, new));
            }
        });
        out.rows += a.n_chosen() - before;
        Ok(ControlFlow::Continue(()))
    };
    match listed {
        Some(ids) => version.for_each_picked(reader, &crate::query::Pick::Ids(ids), visit)?,
        None => version.for_each_row(reader, visit)?,
    }
    if let Some(row) = a.missed_row() {
        return Err(Error::UnknownRow {
            table: version.table.clone(),
            row: row.to_string(),
        });
    }
    if let Some((row, e)) = a.failed() {
        let column = fix.action.column().unwrap_or_default();
        return Err(Error::Invalid(format!(
            "row {row} {column}: {e}; choose the rows it fits with --rows or --where"
        )));
    }
    Ok((out, broken))
}

/// A fix that was recorded as pending.
#[derive(Debug, Clone)]
pub struct Recorded {
    /// The fix as stored.
    pub fix: Fix,
    /// A remark for the user (e.g. the cell already holds the value).
    pub note: Option<String>,
    /// What it will change in the latest version, for fixes checked by a pass over it.
    pub preview: Option<Preview>,
}

/// Evidence files opened (pipes copied, sizes checked) before the write lock is taken, each
/// once however many fixes name it.
pub struct Attachments {
    opened: Vec<(PathBuf, Input)>,
}

impl Attachments {
    /// Open every file `paths` name, with `opts` (its size limit; pipes are copied to
    /// `opts.spool_dir`, or beside `store` when that is `None`).
    pub fn open<'p>(
        store: &Store,
        paths: impl IntoIterator<Item = &'p PathBuf>,
        opts: &InputOptions,
    ) -> Result<Attachments> {
        let mut opts = opts.clone();
        if opts.spool_dir.is_none() {
            opts.spool_dir = super::ingest::spool_beside(store).spool_dir;
        }
        let mut opened: Vec<(PathBuf, Input)> = Vec::new();
        for path in paths {
            if !opened.iter().any(|(p, _)| p == path) {
                opened.push((path.clone(), Input::open(path, &opts)?));
            }
        }
        Ok(Attachments { opened })
    }

    pub(super) fn get(&self, path: &Path) -> Result<&Input> {
        self.opened
            .iter()
            .find(|(p, _)| p == path)
            .map(|(_, i)| i)
            .ok_or_else(|| Error::Invalid(format!("{} was not opened", path.display())))
    }
}

/// Check a fix against the table's latest version and record it as pending. Its evidence is
/// read with `evidence` (the size limit) before the write lock is taken.
pub fn record_fix(
    store: &mut Store,
    req: FixRequest,
    now: &str,
    evidence: &InputOptions,
) -> Result<Recorded> {
    let files = Attachments::open(store, &req.evidence, evidence)?;
    let tx = store.transaction()?;
    let done = record_in(&tx, req, now, &files)?;
    tx.commit()?;
    Ok(done)
}

/// Checks and records several fixes as pending in one transaction: all are recorded, or, when
/// one is refused, none is; the error names the 1-based place of the refused one.
pub fn record_fixes(
    store: &mut Store,
    reqs: Vec<FixRequest>,
    now: &str,
    evidence: &InputOptions,
) -> std::result::Result<Vec<Recorded>, (usize, Error)> {
    let files = Attachments::open(store, reqs.iter().flat_map(|r| &r.evidence), evidence)
        .map_err(|e| (0, e))?;
    let tx = store.transaction().map_err(|e| (0, e))?;
    let mut out = Vec::with_capacity(reqs.len());
    for (i, req) in reqs.into_iter().enumerate() {
        out.push(record_in(&tx, req, now, &files).map_err(|e| (i + 1, e))?);
    }
    tx.commit().map_err(|e| (0, e))?;
    Ok(out)
}

fn record_in(
    tx: &WriteTx<'_>,
    mut req: FixRequest,
    now: &str,
    files: &Attachments,
) -> Result<Recorded> {
    if req.why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    let reader = tx.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    if reader.extract_at(&req.table, head)?.is_none() {
        return Err(Error::UnknownTable(req.table));
    }
    let version = Version::load(&reader, &req.table, head, false)?;
    // Copies of a keyed table differ in their key: compare the other columns, named in the
    // fix so it means the same on every extract.
    if let FixAction::ExcludeRows {
        rows: Rows::Duplicates(columns),
        ..
    } = &mut req.action
    {
        for c in columns.iter() {
            version.col_idx(c)?;
        }
        if columns.is_empty() && !version.def.key.is_empty() {
            *columns = version
                .header()
                .iter()
                .filter(|h| !version.def.key.contains(h))
                .cloned()
                .collect();
        }
    }
    let mut note = None;
    if let Some(col) = req.action.column() {
        version.col_idx(col)?;
        if version.def.key.iter().any(|k| k == col)
            && !matches!(req.action, FixAction::Distrust { .. })
        {
            return Err(Error::KeyColumn {
                table: req.table.clone(),
                column: col.to_string(),
            });
        }
    }
    let find = |row: &RowId| {
        version
            .find_row(&reader, row)?
            .ok_or_else(|| Error::UnknownRow {
                table: req.table.clone(),
                row: row.to_string(),
            })
    };
    match &req.action {
        FixAction::Set { row, column, value } => {
            let (_, cells, _) = find(row)?;
            if &cells[version.col_idx(column)?] == value {
                note = Some(format!("row {row} {column} already holds this value"));
            }
        }
        FixAction::Exclude { row } => {
            find(row)?;
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
        FixAction::Edit { .. }
        | FixAction::ExcludeRows { .. }
        | FixAction::Keep { .. }
        | FixAction::Note { .. } => {}
        FixAction::Withdraw { seq, fix } => {
            let original = committed_fix(&reader, *seq, *fix)?;
            if original.fix.table != req.table {
                return Err(Error::Invalid(format!(
                    "fix {seq}.{fix} is a fix of table '{}', not '{}'",
                    original.fix.table, req.table
                )));
            }
            match original.fix.action {
                FixAction::Rules { .. } => {
                    return Err(Error::Invalid(format!(
                        "fix {seq}.{fix} adopts a rules file; adopt another one with 'emend rules' instead"
                    )));
                }
                FixAction::Withdraw { .. } => {
                    return Err(Error::Invalid(format!(
                        "fix {seq}.{fix} is itself a withdrawal; record the fix again instead"
                    )));
                }
                _ => {}
            }
            let target = format!("{seq}.{fix}");
            let done = !reader
                .marks_of(&req.table, "withdraw", &target, 0, head)?
                .is_empty();
            let queued = reader.pending()?.iter().any(|p| p.fix.action == req.action);
            if done || queued {
                return Err(Error::Invalid(format!(
                    "fix {seq}.{fix} is already withdrawn{}",
                    if queued { " (pending)" } else { "" }
                )));
            }
        }
        FixAction::Rules { .. } => {
            return Err(Error::Invalid(
                "a rules file is adopted with 'emend rules TABLE FILE --why ...'".into(),
            ));
        }
    }
    // Fixes that act on many cells are tried on the latest version first (one pass): a fix
    // that would change nothing is refused unless asked for, so a misspelt value or a
    // condition that matches no row is caught before it is signed.
    // The rules in force: a new value that breaks the column's type, levels, pattern or hard
    // bounds is refused unless that rule is named with --despite.
    let rules = match crate::query::rules_at(&reader, &req.table, head)? {
        Some((_, _, text)) => crate::checks::RuleSet::parse(&text).ok(),
        None => None,
    };
    let mut broken: Option<Broken> = None;
    if let (
        Some(r),
        FixAction::Set {
            row,
            column,
            value: Some(v),
        },
    ) = (&rules, &req.action)
        && let Some((id, why)) = r.breaks(column, v)
    {
        broken = Some((row.clone(), id, why));
    }
    let mut shown = None;
    let tried = !matches!(
        req.action,
        FixAction::Set { .. } | FixAction::Exclude { .. } | FixAction::Distrust { .. }
    );
    if tried {
        let probe = Fix {
            table: req.table.clone(),
            action: req.action.clone(),
            why: String::new(),
            evidence: Vec::new(),
            consulted: None,
            origins: Vec::new(),
        };
        let (p, b) = preview(&reader, &version, &probe, rules.as_ref())?;
        broken = broken.or(b);
        let chooses = matches!(
            req.action,
            FixAction::ExcludeRows { .. } | FixAction::Keep { .. } | FixAction::Note { .. }
        );
        let nothing = if chooses { p.rows == 0 } else { p.cells == 0 };
        let withdrawal = matches!(req.action, FixAction::Withdraw { .. });
        if nothing && !req.allow_empty && !withdrawal {
            return Err(Error::Invalid(format!(
                "{} {} in the latest version of '{}'; check the values or the condition, or give --allow-empty to record it anyway",
                req.action.describe(),
                if chooses {
                    "chooses no row"
                } else {
                    "changes no cell"
                },
                req.table
            )));
        }
        shown = Some(p);
    }
    let mut why = req.why.trim().to_string();
    if let Some((row, id, problem)) = broken {
        if req.despite.as_deref() != Some(id.as_str()) {
            return Err(Error::Invalid(format!(
                "row {row}: {problem}, which breaks rule {id} of the rules in force; give --despite {id} to record it anyway (the reason then names the rule)"
            )));
        }
        why = format!("{why} [despite rule {id}]");
    } else if let Some(d) = &req.despite {
        return Err(Error::Invalid(format!(
            "--despite {d}: no new value of this fix breaks that rule; leave --despite out"
        )));
    }
    // A fix on a distrusted column or an excluded row is allowed, and said.
    let mut remarks: Vec<String> = note.into_iter().collect();
    if let Some(col) = req.action.column()
        && let Ok(i) = version.col_idx(col)
        && version.distrusted()[i]
        && !matches!(req.action, FixAction::Distrust { .. })
    {
        remarks.push(format!(
            "column {col} is distrusted: export leaves it out unless --with-distrusted"
        ));
    }
    if let FixAction::Set { row, .. } = &req.action
        && version.is_excluded(row)
    {
        remarks.push(format!("row {row} is excluded: export leaves it out"));
    }
    let note = (!remarks.is_empty()).then(|| remarks.join("; "));
    let mut evidence = Vec::new();
    for path in &req.evidence {
        let (blob, n_bytes) = store_file(tx, files.get(path)?)?;
        evidence.push(Evidence {
            name: path
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default(),
            blob,
            n_bytes,
        });
    }
    let by = req.by;
    let fix = Fix {
        table: req.table,
        action: req.action,
        why,
        evidence,
        consulted: req.consulted.filter(|c| !c.trim().is_empty()),
        origins: Vec::new(),
    };
    // `status` shows what the fix will do, as found when it was recorded.
    let effect = shown.as_ref().map(|p| {
        let show = |v: &Option<String>| match v {
            Some(v) => format!("'{v}'"),
            None => "missing".to_owned(),
        };
        let samples: Vec<String> = p
            .samples
            .iter()
            .map(|(row, old, new)| format!("{row}: {} → {}", show(old), show(new)))
            .collect();
        let cells = crate::model::quantity(p.cells, "cell changes", "cells change");
        let rows = crate::model::quantity(p.rows, "row chosen", "rows chosen");
        let mut text = if matches!(
            fix.action,
            FixAction::Keep { .. } | FixAction::Note { .. } | FixAction::ExcludeRows { .. }
        ) {
            format!("when recorded: {rows}")
        } else if fix.action.rows().is_some() {
            format!("when recorded: {cells}, {rows}")
        } else {
            format!("when recorded: {cells}")
        };
        if !samples.is_empty() {
            text.push_str(&format!("; {}", samples.join(", ")));
        }
        text
    });
    tx.add_pending(&fix, effect.as_deref(), now, by.as_ref())?;
    Ok(Recorded {
        fix,
        note,
        preview: shown,
    })
}

/// Store an opened file (evidence) content-addressed, streaming it in pieces from its first
/// byte; a regular file that changed while it was read is refused.
pub fn store_file(tx: &WriteTx<'_>, input: &Input) -> Result<(BlobId, u64)> {
    input.rewind()?;
    let (id, n_bytes) = store_stream(tx, input.path(), input.reader())?;
    input.finish(n_bytes)?;
    Ok((id, n_bytes))
}

/// Store bytes already read (a rules file, exactly as it was parsed) content-addressed.
pub fn store_bytes(tx: &WriteTx<'_>, name: &Path, bytes: &[u8]) -> Result<(BlobId, u64)> {
    store_stream(tx, name, bytes)
}

fn store_stream(tx: &WriteTx<'_>, path: &Path, mut file: impl Read) -> Result<(BlobId, u64)> {
    let mut hasher = blake3::Hasher::new();
    let mut chunks = Vec::new();
    let mut n_bytes = 0u64;
    let mut buf = vec![0u8; PIECE_SIZE];
    let mut encoder = PieceEncoder::new()?;
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
        let encoded = encoder.plain(piece)?;
        tx.put_piece(&encoded)?;
        chunks.push(encoded.id);
        if filled < buf.len() {
            break;
        }
    }
    let id = BlobId(Digest(*hasher.finalize().as_bytes()));
    tx.put_blob(&id, n_bytes, &chunks)?;
    Ok((id, n_bytes))
}

/// Whether `me` may drop a pending fix: their own, or one recorded without an identity.
fn mine(p: &crate::store::PendingFix, me: Option<&[u8; 32]>) -> bool {
    match (&p.by, me) {
        (None, _) => true,
        (Some(b), Some(k)) => b.key == *k,
        (Some(_), None) => false,
    }
}

/// Drop the pending fixes `me` recorded (and those recorded without an identity). Returns
/// how many were dropped, and how many of other people's were left.
pub fn discard(store: &mut Store, me: Option<&[u8; 32]>) -> Result<(usize, usize)> {
    let tx = store.transaction()?;
    let pending = tx.read().pending()?;
    let (own, others): (Vec<_>, Vec<_>) = pending.iter().partition(|p| mine(p, me));
    for p in &own {
        tx.drop_pending(p.id)?;
    }
    tx.commit()?;
    Ok((own.len(), others.len()))
}

/// Drop the `n`th pending fix (1-based, in the order `status` lists them) and return it; a
/// fix another person recorded is theirs to drop.
pub fn discard_one(store: &mut Store, n: usize, me: Option<&[u8; 32]>) -> Result<Fix> {
    let tx = store.transaction()?;
    let pending = tx.read().pending()?;
    let Some(p) = n.checked_sub(1).and_then(|i| pending.get(i)) else {
        return Err(Error::Invalid(format!(
            "there is no pending fix {n}: {} pending ('emend status' lists them)",
            crate::model::quantity(pending.len() as u64, "fix is", "fixes are")
        )));
    };
    if !mine(p, me) {
        return Err(Error::Invalid(format!(
            "pending fix {n} was recorded by {}; they discard it themselves",
            p.by.as_ref().map_or("someone else", |b| b.name.as_str())
        )));
    }
    tx.drop_pending(p.id)?;
    let fix = p.fix.clone();
    tx.commit()?;
    Ok(fix)
}

/// Per fix: the cells it changed and the rows it chose; and the table version after all.
type Resolved = (Vec<Vec<CellEdit>>, Vec<Vec<RowId>>, TableVersion);

/// Apply the pending fixes of one table to a version, row by row, recording each cell changed.
fn resolve_fixes(reader: &Reader<'_>, version: &Version, fixes: &[&Fix]) -> Result<Resolved> {
    let header = version.header().to_vec();
    let originals = withdrawn(reader, fixes)?;
    let book = RuleBook::load(reader, fixes.iter().copied())?;
    let mut appliers: Vec<FixApplier<'_>> = appliers(fixes, &originals, &header, &book)?;
    let mut edits: Vec<Vec<CellEdit>> = vec![Vec::new(); fixes.len()];
    let mut distrusted = version.distrusted().to_vec();
    for (a, original) in appliers.iter().zip(&originals) {
        if let (FixAction::Distrust { .. }, Some(c)) = (&a.fix().action, a.column()) {
            distrusted[c] = true;
        }
        // Withdrawing a distrust trusts the column again.
        if let Some(FixAction::Distrust { column }) = original.as_ref().map(|o| &o.fix.action)
            && let Some(c) = header.iter().position(|h| h == column)
        {
            distrusted[c] = false;
        }
    }
    let mut hash = VersionHashBuilder::new(&header);
    let mut n_rows = 0u64;
    let mut cells: Vec<Option<String>> = Vec::new();
    version.for_each_row(reader, |row| {
        cells.clear();
        cells.extend_from_slice(row.cells);
        let mut excluded = row.excluded;
        for (k, a) in appliers.iter_mut().enumerate() {
            a.apply(row.id, &mut cells, &mut excluded, |col, old, new| {
                edits[k].push(CellEdit {
                    row: row.id.clone(),
                    column: header[col].clone(),
                    old,
                    new,
                });
            });
        }
        hash.row(row.id, excluded, &cells);
        n_rows += 1;
        Ok(ControlFlow::Continue(()))
    })?;
    if let Some(row) = appliers.iter().find_map(FixApplier::missed_row) {
        return Err(Error::UnknownRow {
            table: version.table.clone(),
            row: row.to_string(),
        });
    }
    if let Some((a, (row, e))) = appliers.iter().find_map(|a| a.failed().map(|f| (a, f))) {
        return Err(Error::Invalid(format!(
            "{}: row {row}: {e}; discard the fix and choose rows it fits",
            a.fix().action.describe()
        )));
    }
    let chosen: Vec<Vec<RowId>> = appliers.iter().map(|a| a.chosen().to_vec()).collect();
    Ok((
        edits,
        chosen,
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
    commit_pending_deferring(store, message, ctx, false)
}

/// Commit the signer's pending fixes (and those recorded without an identity) as one signed
/// commit; fixes another person recorded stay pending for them to sign. Refused while a
/// carried conflict is open, unless `defer` records each as deferred (a signed note on its
/// cells) in the same commit.
pub fn commit_pending_deferring(
    store: &mut Store,
    message: &str,
    ctx: &CommitContext<'_>,
    defer: bool,
) -> Result<CommitOutcome> {
    if message.trim().is_empty() {
        return Err(Error::Invalid(
            "a commit needs a message: -m \"...\"".into(),
        ));
    }
    let tx = store.transaction()?;
    let reader = tx.read();
    let signer = ctx.signer.public_key();
    // Nobody signs another person's fixes under their own message.
    let mut pending: Vec<_> = reader
        .pending()?
        .into_iter()
        .filter(|p| p.by.as_ref().is_none_or(|b| b.key == signer))
        .collect();
    let conflicts = reader.conflicts()?;
    if !conflicts.is_empty() && !defer {
        return Err(Error::Invalid(format!(
            "{} open; answer each with 'emend resolve N --apply | --keep-source | --set VALUE | --missing | --defer --why ...' ('emend status' lists them), or commit with --defer-conflicts to record them all as deferred",
            crate::model::quantity(
                conflicts.len() as u64,
                "carried conflict is",
                "carried conflicts are"
            )
        )));
    }
    let ids: Vec<i64> = pending.iter().map(|p| p.id).collect();
    for c in &conflicts {
        let fix = super::carry::answer(
            &c.conflict,
            &super::carry::Resolution::Defer,
            "deferred at commit",
        );
        pending.push(crate::store::PendingFix {
            id: 0,
            fix,
            added_at: ctx.now.clone(),
            note: None,
            by: None,
            resolves_conflict: true,
        });
        tx.drop_conflict(c.id)?;
    }
    if pending.is_empty() {
        let others = reader.pending()?.len();
        if others > 0 {
            return Err(Error::Invalid(format!(
                "{} pending, none recorded by you: the person who recorded them commits them",
                crate::model::quantity(others as u64, "fix is", "fixes are")
            )));
        }
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
        let (edits, chosen, tv) = resolve_fixes(&reader, &version, &fixes)?;
        for ((i, e), rows) in idx.into_iter().zip(edits).zip(chosen) {
            let mut fix = pending[i].fix.clone();
            // Fixes that choose rows sign the exact rows they chose.
            if let FixAction::ExcludeRows { resolved, .. }
            | FixAction::Keep { resolved, .. }
            | FixAction::Note { resolved, .. } = &mut fix.action
            {
                *resolved = rows;
            }
            records[i] = Some(FixRecord { fix, edits: e });
        }
        versions.push(tv);
    }
    let records: Vec<FixRecord> = records
        .into_iter()
        .map(|r| r.expect("every pending fix belongs to one table"))
        .collect();
    let done = seal(&tx, ctx, message.trim(), Change::Fixes(records), versions)?;
    tx.commit_pending_rows(&ids)?;
    tx.commit()?;
    Ok(done)
}

#[cfg(test)]
mod tests {
    use super::super::testkit::{Kit, NOW};
    use super::*;
    use crate::query::{Version, decode};

    #[test]
    fn a_commit_resolves_each_fix_to_the_exact_cells_it_changes() {
        let mut kit = Kit::new();
        kit.fix(FixAction::Recode {
            column: "site".into(),
            pairs: vec![("mill craek".into(), "Mill Creek".into())],
        });
        kit.fix(FixAction::Missing {
            column: "ph".into(),
            codes: vec!["-999".into()],
        });
        kit.fix(FixAction::Set {
            row: RowId("S-2".into()),
            column: "ph".into(),
            value: Some("7.1".into()),
        });
        let seq = kit.commit("first pass");
        assert_eq!(seq, 2);
        let reader = kit.store.read();
        let body = decode(&reader.try_commit(seq).unwrap().unwrap()).unwrap();
        let Change::Fixes(records) = &body.change else {
            panic!("a fixes commit")
        };
        let cells: Vec<Vec<(&str, &str, Option<&str>)>> = records
            .iter()
            .map(|r| {
                r.edits
                    .iter()
                    .map(|e| (e.row.as_str(), e.column.as_str(), e.new.as_deref()))
                    .collect()
            })
            .collect();
        assert_eq!(
            cells,
            vec![
                vec![
                    ("S-1", "site", Some("Mill Creek")),
                    ("S-3", "site", Some("Mill Creek"))
                ],
                vec![("S-3", "ph", None)],
                vec![("S-2", "ph", Some("7.1"))],
            ]
        );
        // The hash signed into the commit is the hash of the version rebuilt from the extract.
        let rebuilt = Version::load(&reader, "samples", seq, false).unwrap();
        assert_eq!(rebuilt.hash(&reader).unwrap().0, body.versions[0].hash);
        assert!(reader.pending().unwrap().is_empty());
    }

    #[test]
    fn fixes_that_cannot_apply_are_refused_before_they_are_recorded() {
        let mut kit = Kit::new();
        let req = |action| FixRequest {
            table: "samples".into(),
            action,
            why: "test".into(),
            evidence: Vec::new(),
            consulted: None,
            allow_empty: false,
            despite: None,
            by: None,
        };
        let key = record_fix(
            &mut kit.store,
            req(FixAction::Set {
                row: RowId("S-1".into()),
                column: "sample_id".into(),
                value: Some("S-9".into()),
            }),
            NOW,
            &InputOptions::default(),
        );
        assert!(matches!(key, Err(Error::KeyColumn { .. })), "{key:?}");
        let row = record_fix(
            &mut kit.store,
            req(FixAction::Exclude {
                row: RowId("S-404".into()),
            }),
            NOW,
            &InputOptions::default(),
        );
        assert!(matches!(row, Err(Error::UnknownRow { .. })), "{row:?}");
        let mut no_reason = req(FixAction::Distrust {
            column: "ph".into(),
        });
        no_reason.why = "  ".into();
        assert!(matches!(
            record_fix(&mut kit.store, no_reason, NOW, &InputOptions::default()),
            Err(Error::EmptyReason)
        ));
        assert!(kit.store.read().pending().unwrap().is_empty());
        let signer = super::super::testkit::signer();
        let ctx = super::super::testkit::ctx(&signer);
        let nothing = commit_pending(&mut kit.store, "nothing", &ctx);
        assert!(matches!(nothing, Err(Error::NothingPending)));
    }
}
