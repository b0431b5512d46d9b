//! A workbook (`.xlsx`, `.ods`) as an extract: its bytes stored exactly, one sheet's cells
//! (`table::sheet`) validated and hashed as the raw version.
//!
//! Unlike a CSV a workbook is read whole into memory (the archive's index is at its end, and a
//! sheet's cells may come in any order), so this is the one ingest path whose memory grows with
//! the file: the bytes, plus the sheet's cells (docs/performance.md has the figures). Nothing is
//! written to the store until the sheet has been read and checked, and a bad sheet aborts the
//! transaction like a bad CSV.

use super::{IngestOptions, IngestOutcome, Input, LIST_AT_MOST};
use crate::error::{Error, Result};
use crate::store::WriteTx;

/// The workbook-only options of an ingest.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct SheetOptions {
    /// The sheet by name (the first sheet when `None`).
    pub sheet: Option<String>,
    /// The header's 1-based row (the first filled row when `None`).
    pub header_row: Option<u32>,
}

/// Every sheet's name in a workbook input, in order; the input is rewound after.
#[cfg(feature = "xlsx")]
pub fn sheet_names(input: &Input) -> Result<Vec<String>> {
    input.rewind()?;
    let bytes = input.read_all()?;
    input.rewind()?;
    let book = crate::table::sheet::Workbook::open(&bytes, input.path())?;
    Ok(book.sheet_names())
}

/// Every sheet's name in a workbook input (this build reads no workbooks).
#[cfg(not(feature = "xlsx"))]
pub fn sheet_names(input: &Input) -> Result<Vec<String>> {
    Err(no_workbooks(input))
}

/// The rows of the first sheet of a workbook input whose header (its first filled row) names
/// every column in `required`: the header, and each data row with its sheet row number. For a
/// reviewer's answers in a workbook (`decisions apply`); cells are canonical text.
#[cfg(feature = "xlsx")]
pub fn sheet_rows(input: &Input, required: &[&str]) -> Result<SheetRows> {
    use crate::table::workbook::SheetChoice;
    let bytes = input.read_all()?;
    let mut book = crate::table::sheet::Workbook::open(&bytes, input.path())?;
    let names = book.sheet_names();
    for (i, name) in names.iter().enumerate() {
        let Ok(table) = book.sheet(&SheetChoice::Index(i as u32), None, false) else {
            continue;
        };
        if !required.iter().all(|r| table.header.iter().any(|h| h == r)) {
            continue;
        }
        let mut rows = Vec::new();
        table.for_each_row(|r, cells| -> Result<std::ops::ControlFlow<()>> {
            rows.push((u64::from(r), cells.to_vec()));
            Ok(std::ops::ControlFlow::Continue(()))
        })?;
        return Ok(SheetRows {
            sheet: name.clone(),
            header: table.header,
            rows,
        });
    }
    Err(Error::BadWorkbook {
        path: input.path().to_path_buf(),
        problem: format!(
            "no sheet has a header naming {} (sheets: {})",
            required.join(" and "),
            names.join(", ")
        ),
        hint: "put the decisions on a sheet whose first row names the columns row, column, action, value and why".into(),
    })
}

/// A workbook's rows (this build reads no workbooks).
#[cfg(not(feature = "xlsx"))]
pub fn sheet_rows(input: &Input, _required: &[&str]) -> Result<SheetRows> {
    Err(no_workbooks(input))
}

/// One sheet's rows as text, from [`sheet_rows`].
#[derive(Debug, Clone)]
pub struct SheetRows {
    /// The sheet's name.
    pub sheet: String,
    /// Its header.
    pub header: Vec<String>,
    /// Each data row: the 1-based sheet row and its cells.
    pub rows: Vec<(u64, Vec<String>)>,
}

#[cfg(not(feature = "xlsx"))]
fn no_workbooks(input: &Input) -> Error {
    Error::BadWorkbook {
        path: input.path().to_path_buf(),
        problem: "this build of emend reads no workbooks (built without the 'xlsx' feature)".into(),
        hint: "nothing was stored; save the sheet as CSV, or use a build with the default features"
            .into(),
    }
}

/// Store a workbook as a new extract of `opts.table`, inside `tx`: the whole file byte for
/// byte, and the chosen sheet's cells as the raw version.
#[cfg(not(feature = "xlsx"))]
pub(super) fn store_workbook(
    _tx: &WriteTx<'_>,
    input: &mut Input,
    _opts: &IngestOptions,
) -> Result<IngestOutcome> {
    Err(no_workbooks(input))
}

/// Store a workbook as a new extract of `opts.table`, inside `tx`: the whole file byte for
/// byte, and the chosen sheet's cells as the raw version.
#[cfg(feature = "xlsx")]
pub(super) fn store_workbook(
    tx: &WriteTx<'_>,
    input: &mut Input,
    opts: &IngestOptions,
) -> Result<IngestOutcome> {
    use crate::hash::{BlobId, Digest};
    use crate::model::{Dialect, IngestRecord, RowId, TextEncoding};
    use crate::store::{PIECE_SIZE, PieceEncoder};
    use crate::table::workbook::SheetChoice;
    use crate::table::{RowIdBuilder, VersionHashBuilder};
    use std::collections::HashMap;
    use std::io::Read;
    use std::ops::ControlFlow;

    let path = input.path().to_path_buf();
    input.rewind()?;
    let mut bytes = Vec::with_capacity(usize::try_from(input.len()).unwrap_or(0));
    input
        .reader()
        .read_to_end(&mut bytes)
        .map_err(|e| Error::io(&path, e))?;
    input.finish(bytes.len() as u64)?;

    let mut book = crate::table::sheet::Workbook::open(&bytes, &path)?;
    let choice = match &opts.sheet.sheet {
        Some(name) => SheetChoice::Name(name.clone()),
        None => SheetChoice::First,
    };
    let table = book.sheet(&choice, opts.sheet.header_row, true)?;
    let header = table.header.clone();
    let mut key_idx = Vec::new();
    for k in &opts.key {
        let idx = header
            .iter()
            .position(|h| h == k)
            .ok_or_else(|| Error::BadFile {
                path: path.clone(),
                problem: format!(
                    "key column '{k}' is not in the header of sheet '{}' (columns: {})",
                    table.name,
                    header.join(", ")
                ),
            })?;
        if key_idx.contains(&idx) {
            return Err(Error::Invalid(format!("key column '{k}' is named twice")));
        }
        key_idx.push(idx);
    }
    let row_ids = RowIdBuilder::new(key_idx.clone());
    let mut hasher = VersionHashBuilder::new(&header);
    let mut seen: HashMap<String, Vec<u32>> = HashMap::new();
    let mut n_rows = 0u64;
    let mut row_id = String::new();
    let blank_rows = table.for_each_row(|sheet_row, cells| -> Result<ControlFlow<()>> {
        n_rows += 1;
        if let Some(&k) = key_idx.iter().find(|&&k| cells[k].trim().is_empty()) {
            return Err(Error::BadExtract {
                path: path.clone(),
                line: u64::from(sheet_row),
                column: k as u64 + 1,
                problem: format!(
                    "sheet '{}' cell {}{sheet_row}: key column '{}' is blank",
                    table.name,
                    table.column_ref(k),
                    header[k]
                ),
            });
        }
        row_ids.build_into(n_rows, cells, &mut row_id);
        if row_ids.is_keyed() {
            seen.entry(row_id.clone()).or_default().push(sheet_row);
        }
        hasher.raw_row(&row_id, cells);
        Ok(ControlFlow::Continue(()))
    })?;
    let mut dups: Vec<(String, Vec<u32>)> = seen.into_iter().filter(|(_, r)| r.len() > 1).collect();
    if !dups.is_empty() {
        dups.sort_by_key(|(_, rows)| rows[1]);
        let names: Vec<&str> = key_idx.iter().map(|&k| header[k].as_str()).collect();
        let shown: Vec<String> = dups
            .iter()
            .take(LIST_AT_MOST)
            .map(|(k, rows)| {
                let rows: Vec<String> = rows.iter().map(u32::to_string).collect();
                format!("'{}' on rows {}", RowId(k.clone()), rows.join(", "))
            })
            .collect();
        let more = if dups.len() > LIST_AT_MOST {
            format!(" and {} more", dups.len() - LIST_AT_MOST)
        } else {
            String::new()
        };
        return Err(Error::DuplicateKey {
            path: path.clone(),
            problem: format!(
                "sheet '{}': key ({}) is not unique: {}{more}; choose a key that identifies each row, or ingest without --key to name rows by position",
                table.name,
                names.join(", "),
                shown.join("; ")
            ),
        });
    }

    // The sheet is a table: now store the file, in the same pieces a CSV is stored in. A
    // workbook is already compressed, so pieces are not stored as deltas of the previous one.
    let mut encoder = PieceEncoder::new()?;
    let mut chunks = Vec::new();
    let mut new_bytes = 0u64;
    for piece in bytes.chunks(PIECE_SIZE) {
        let known = PieceEncoder::known(piece);
        if tx.read().has_chunk(&known.id)? {
            chunks.push(known.id);
            continue;
        }
        let encoded = encoder.plain(piece)?;
        new_bytes += encoded.data.as_ref().map_or(0, |d| d.len() as u64);
        tx.put_piece(&encoded)?;
        chunks.push(encoded.id);
    }
    let extract = BlobId(Digest::of(&bytes));
    tx.put_blob(&extract, bytes.len() as u64, &chunks)?;
    let record = IngestRecord {
        table: opts.table.clone(),
        extract,
        file_name: input.file_name(),
        n_bytes: bytes.len() as u64,
        header,
        key: opts.key.clone(),
        dialect: Dialect {
            encoding: TextEncoding::Workbook(table.sheet),
            ..Dialect::default()
        },
        n_rows,
    };
    let distrusted = vec![false; record.header.len()];
    let version = hasher.finish(&record.header, &distrusted);
    Ok(IngestOutcome {
        record,
        version,
        blank_lines: blank_rows,
        new_bytes,
        notes: table.notes,
        row_map: Vec::new(),
    })
}
