//! Ingest as a signed commit: the extract stored by [`crate::ingest`] and its record sealed in
//! one transaction.

use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::ingest::{IngestOptions, IngestOutcome, Input, InputOptions};
use crate::model::{Change, TableVersion};
use crate::query::ingest_record;
use crate::store::Store;
use std::path::Path;

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

/// Ingest a file as a new extract of a table: one signed commit. A FIFO is copied to a private
/// file in the store's folder before the write lock is taken.
pub fn ingest(
    store: &mut Store,
    path: &Path,
    opts: &IngestOptions,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<(CommitOutcome, IngestOutcome)> {
    check_table_name(&opts.table)?;
    let mut input = Input::open(path, &spool_beside(store))?;
    ingest_input(store, &mut input, opts, message, ctx)
}

/// Where piped inputs are copied: the store's own folder, on the same disk as the store.
pub fn spool_beside(store: &Store) -> InputOptions {
    InputOptions {
        max_bytes: None,
        spool_dir: store.path().parent().map(Path::to_path_buf),
    }
}

/// Ingest an input opened (and, for a pipe, copied) beforehand, so that nothing slow happens
/// while the write lock is held: one signed commit.
pub fn ingest_input(
    store: &mut Store,
    input: &mut Input,
    opts: &IngestOptions,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<(CommitOutcome, IngestOutcome)> {
    let mut done = ingest_each(store, input, std::slice::from_ref(opts), message, ctx)?;
    Ok(done.pop().expect("one ingest was asked for"))
}

/// Ingest one input several times in one transaction, one signed commit each: the sheets of a
/// workbook into one table each (`ingest --sheets`). All land, or none does.
pub fn ingest_each(
    store: &mut Store,
    input: &mut Input,
    each: &[IngestOptions],
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<Vec<(CommitOutcome, IngestOutcome)>> {
    let tx = store.transaction()?;
    let mut out = Vec::with_capacity(each.len());
    for opts in each {
        out.push(ingest_in(&tx, input, opts, message, ctx)?);
    }
    tx.commit()?;
    Ok(out)
}

fn ingest_in(
    tx: &crate::store::WriteTx<'_>,
    input: &mut Input,
    opts: &IngestOptions,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<(CommitOutcome, IngestOutcome)> {
    check_table_name(&opts.table)?;
    let mut opts = opts.clone();
    {
        let reader = tx.read();
        if reader.pending()?.iter().any(|p| p.fix.table == opts.table) {
            return Err(Error::PendingFixes {
                table: opts.table.clone(),
                action: "a new extract",
            });
        }
        if let Some((seq, extract)) = reader.extract_at(&opts.table, u64::MAX)? {
            if opts.key.is_empty() {
                opts.key = ingest_record(&reader, seq)?.key;
            }
            let _ = extract;
        }
    }
    let mut outcome = crate::ingest::store_extract(tx, input, &opts)?;
    if let Some((_, latest)) = tx.read().extract_at(&opts.table, u64::MAX)?
        && latest == outcome.record.extract
    {
        return Err(Error::Invalid(format!(
            "{} is already the newest extract of '{}' (same bytes, {})",
            input.path().display(),
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
        tx,
        ctx,
        &message,
        Change::Ingest(outcome.record.clone()),
        versions,
    )?;
    // An extract read whole to rebuild (a workbook) has no row map: its rows are found by a
    // full read.
    if !outcome.row_map.is_empty() {
        tx.put_row_map(&opts.table, done.seq, &std::mem::take(&mut outcome.row_map))?;
    }
    Ok((done, outcome))
}
