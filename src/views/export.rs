//! Writing a version, or the raw extract bytes, to any `Write`.
//!
//! Export is deterministic: the same version and options give the same bytes every run. It
//! writes the extract's own delimiter, line ends, byte-order mark and quoting style, in UTF-8.

use crate::error::{Error, Result};
use crate::hash::BlobId;
use crate::query::Version;
use crate::store::Reader;
use crate::table::VersionHashBuilder;
use crate::table::csv::write_record;
use std::borrow::Cow;
use std::io::Write;
use std::ops::ControlFlow;

/// Knobs for [`export_version`].
#[derive(Debug, Clone, Default)]
pub struct ExportOptions {
    /// Text written for missing and blank cells (default: empty).
    pub na: Option<String>,
    /// Keep excluded rows.
    pub with_excluded: bool,
    /// Add a last column, `emend_notes`, holding the notes for review on each row (`emend
    /// note`), each as `column: reason` (or the reason alone for a note on the whole row),
    /// joined by ` | `; empty for rows without notes.
    pub notes: bool,
    /// Keep distrusted columns.
    pub with_distrusted: bool,
    /// Put an apostrophe before every cell (and column name) a spreadsheet would run as a
    /// formula ([`crate::values::looks_like_formula`]); the output is then no longer the exact
    /// data. Off by default: an export is the version's exact values.
    pub spreadsheet_safe: bool,
}

/// The header of the notes column [`ExportOptions::notes`] adds.
pub const NOTES_COLUMN: &str = "emend_notes";

/// Every note for review up to `version`, by row id, in the order they were recorded.
fn notes_by_row(
    reader: &Reader<'_>,
    version: &Version,
) -> Result<std::collections::HashMap<String, Vec<String>>> {
    let mut out: std::collections::HashMap<String, Vec<String>> = Default::default();
    if version.raw {
        return Ok(out);
    }
    let mut bodies: std::collections::HashMap<u64, crate::model::CommitBody> = Default::default();
    for m in reader.marks(&version.table, version.ingest_seq, version.seq)? {
        if m.kind != "note" {
            continue;
        }
        if let std::collections::hash_map::Entry::Vacant(e) = bodies.entry(m.seq) {
            let stored = reader
                .try_commit(m.seq)?
                .ok_or_else(|| Error::Corrupt(format!("commit {} is missing", m.seq)))?;
            e.insert(crate::query::decode(&stored)?);
        }
        let why = match &bodies[&m.seq].change {
            crate::model::Change::Fixes(list) => list
                .get(m.fix_idx as usize)
                .map(|r| r.fix.why.clone())
                .unwrap_or_default(),
            _ => String::new(),
        };
        let (row, text) = match m.target.split_once(crate::model::CELL_SEPARATOR) {
            Some((row, column)) => (row.to_owned(), format!("{column}: {why}")),
            None => (m.target.clone(), why),
        };
        out.entry(row).or_default().push(text);
    }
    Ok(out)
}

/// What an export wrote.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ExportOutcome {
    /// Data rows written.
    pub n_rows: u64,
    /// Columns written.
    pub n_columns: usize,
    /// Rows left out as excluded.
    pub n_left_out: u64,
    /// Cells (and column names) that a spreadsheet would run as formulas; defused when
    /// [`ExportOptions::spreadsheet_safe`] is on, written as they are otherwise.
    pub n_formulas: u64,
}

/// A cell's bytes for the CSV; counts it in `n_formulas` when a spreadsheet would run it as a
/// formula, and defuses it when `safe`.
fn cell_bytes<'a>(text: &'a str, safe: bool, n_formulas: &mut u64) -> Cow<'a, [u8]> {
    if crate::values::looks_like_formula(text) {
        *n_formulas += 1;
        if safe {
            return Cow::Owned(crate::values::defuse_formula(text).into_bytes());
        }
    }
    Cow::Borrowed(text.as_bytes())
}

/// Write a version as CSV in the extract's dialect.
pub fn export_version(
    reader: &Reader<'_>,
    version: &Version,
    opts: &ExportOptions,
    out: &mut dyn Write,
) -> Result<ExportOutcome> {
    let d = &version.def.dialect;
    let keep: Vec<usize> = (0..version.header().len())
        .filter(|&i| opts.with_distrusted || !version.is_distrusted(i))
        .collect();
    let io = |e: std::io::Error| Error::io("<output>", e);
    let notes = if opts.notes {
        Some(notes_by_row(reader, version)?)
    } else {
        None
    };
    let mut n_formulas = 0u64;
    let safe = opts.spreadsheet_safe;
    if d.bom {
        out.write_all(&[0xEF, 0xBB, 0xBF]).map_err(io)?;
    }
    write_record(
        out,
        keep.iter()
            .map(|&i| cell_bytes(&version.header()[i], safe, &mut n_formulas))
            .chain(notes.as_ref().map(|_| NOTES_COLUMN.as_bytes().into()))
            .collect::<Vec<_>>()
            .iter()
            .map(|c| &c[..]),
        d.delimiter,
        d.quote_all,
        d.crlf,
    )
    .map_err(io)?;
    let na = opts.na.as_deref().unwrap_or("");
    let mut n_rows = 0;
    let mut n_left_out = 0;
    // The version written is hashed as it goes and compared at the end with the hash its
    // signed commit records: a stored piece or derived row changed outside emend fails the
    // export (and the caller removes what was written) instead of passing as cleaned data.
    let mut check = VersionHashBuilder::new(version.header());
    let mut n_seen = 0u64;
    version.for_each_row(reader, |row| {
        check.row(row.id, row.excluded, row.cells);
        n_seen += 1;
        if row.excluded && !opts.with_excluded {
            n_left_out += 1;
            return Ok(ControlFlow::Continue(()));
        }
        let note = notes.as_ref().map(|n| {
            n.get(row.id.as_str())
                .map(|l| l.join(" | "))
                .unwrap_or_default()
        });
        let mut fields: Vec<Cow<'_, [u8]>> = Vec::with_capacity(keep.len() + 1);
        for &i in &keep {
            fields.push(match &row.cells[i] {
                Some(v) if !v.is_empty() => cell_bytes(v, safe, &mut n_formulas),
                _ => na.as_bytes().into(),
            });
        }
        if let Some(n) = note.as_deref() {
            fields.push(cell_bytes(n, safe, &mut n_formulas));
        }
        write_record(
            out,
            fields.iter().map(|c| &c[..]),
            d.delimiter,
            d.quote_all,
            d.crlf,
        )
        .map_err(io)?;
        n_rows += 1;
        Ok(ControlFlow::Continue(()))
    })?;
    if let Some((hash, n)) = version.recorded(reader)?
        && (version.finish_hash(check) != hash || n != n_seen)
    {
        return Err(Error::Tampered(format!(
            "table '{}' rebuilt as of commit {} does not match the version its signed commit records",
            version.table, version.seq
        )));
    }
    out.flush().map_err(io)?;
    Ok(ExportOutcome {
        n_rows,
        n_columns: keep.len(),
        n_left_out,
        n_formulas,
    })
}

/// A stored evidence file found by the first hex digits of its BLAKE3 hash (at least 6),
/// among the files attached to committed and pending fixes.
pub fn find_evidence(reader: &Reader<'_>, prefix: &str) -> Result<crate::model::Evidence> {
    let prefix = prefix.trim().to_ascii_lowercase();
    if prefix.len() < 6 || !prefix.bytes().all(|b| b.is_ascii_hexdigit()) {
        return Err(Error::Invalid(format!(
            "'{prefix}' is not a file hash: give at least 6 hex digits, as 'emend why' or 'emend status' shows them"
        )));
    }
    let mut found: Vec<crate::model::Evidence> = Vec::new();
    let mut add = |e: &crate::model::Evidence| {
        if e.blob.to_hex().starts_with(&prefix) && !found.iter().any(|f| f.blob == e.blob) {
            found.push(e.clone());
        }
    };
    for (_, body) in crate::query::log(reader)? {
        if let crate::model::Change::Fixes(list) = &body.change {
            list.iter().flat_map(|r| &r.fix.evidence).for_each(&mut add);
        }
    }
    for p in reader.pending()? {
        p.fix.evidence.iter().for_each(&mut add);
    }
    match found.len() {
        1 => Ok(found.remove(0)),
        0 => Err(Error::Invalid(format!(
            "no evidence file's hash starts with {prefix}"
        ))),
        n => Err(Error::Invalid(format!(
            "{n} evidence files' hashes start with {prefix}: give more digits"
        ))),
    }
}

/// Writes a stored file, checking its bytes against its BLAKE3 hash as they stream: on a
/// mismatch the error says so (the output then holds bytes that must not be used).
pub fn export_blob_checked(reader: &Reader<'_>, id: &BlobId, out: &mut dyn Write) -> Result<u64> {
    let mut blob = reader.open_blob(id)?;
    let mut hasher = blake3::Hasher::new();
    let mut buf = vec![0u8; 64 * 1024];
    let mut n = 0u64;
    loop {
        let k = std::io::Read::read(&mut blob, &mut buf).map_err(|e| Error::io("<store>", e))?;
        if k == 0 {
            break;
        }
        hasher.update(&buf[..k]);
        out.write_all(&buf[..k])
            .map_err(|e| Error::io("<output>", e))?;
        n += k as u64;
    }
    if hasher.finalize().as_bytes() != id.as_bytes() {
        return Err(Error::Corrupt(format!(
            "stored file {} does not match its hash; run 'emend verify'",
            id.short()
        )));
    }
    out.flush().map_err(|e| Error::io("<output>", e))?;
    Ok(n)
}

/// Copy a stored extract's bytes unchanged. Returns the byte count.
pub fn export_raw(reader: &Reader<'_>, extract: &BlobId, out: &mut dyn Write) -> Result<u64> {
    let mut blob = reader.open_blob(extract)?;
    // A stored piece that fails its hash comes back as an io error carrying our own error.
    let n = std::io::copy(&mut blob, out).map_err(|e| {
        match e.get_ref().and_then(|i| i.downcast_ref::<Error>()) {
            Some(_) => *e
                .into_inner()
                .and_then(|i| i.downcast::<Error>().ok())
                .expect("checked above"),
            None => Error::io("<output>", e),
        }
    })?;
    out.flush().map_err(|e| Error::io("<output>", e))?;
    Ok(n)
}
