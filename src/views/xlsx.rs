//! `export --xlsx`: a version as a workbook for reviewers (issue 18).
//!
//! The first sheet is the version, typed as the profile types its columns (a number column's
//! numbers as numbers, a date column's dates as dates, booleans as booleans), with every
//! changed, kept or noted cell filled in its own colour and carrying a note that holds each fix
//! on it: the kind, old and new value, the reason, the signer and the commit. The second sheet
//! lists every decision, with the columns and rows of `export --decisions`; a third, when asked
//! for, the raw value beside the new one of each changed cell.
//!
//! A cell is written as a number or a date only when reading the workbook back (through
//! `table::sheet`, as `ingest` does) gives exactly the text of the version: so ingesting the
//! exported workbook gives back the version's cells. Anything else is written as text, never
//! as a formula.

use crate::error::{Error, Result};
use crate::profile::types::{CellKind, InferredType, KindCounts, classify, infer_type};
use crate::query::Version;
use crate::report::{DECISIONS_HEADER, DecisionRow};
use crate::store::Reader;
use crate::table::VersionHashBuilder;
use rust_xlsxwriter::{Color, ExcelDateTime, Format, Note, Workbook, Worksheet};
use std::collections::HashMap;
use std::ops::ControlFlow;

/// The fill of a cell a fix changed.
pub const CHANGED_FILL: u32 = 0xBDD7EE;
/// The fill of a cell kept as it is on purpose.
pub const KEPT_FILL: u32 = 0xC6EFCE;
/// The fill of a cell noted for review.
pub const NOTED_FILL: u32 = 0xFFEB9C;

/// Knobs for [`export_xlsx`].
#[derive(Debug, Clone, Default)]
pub struct XlsxOptions {
    /// Keep excluded rows (marked with the exclusion in a note on their first cell).
    pub with_excluded: bool,
    /// Keep distrusted columns.
    pub with_distrusted: bool,
    /// Add the third sheet: the raw and new value of every changed cell.
    pub raw_values: bool,
}

/// What [`export_xlsx`] wrote.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct XlsxOutcome {
    /// Data rows written to the first sheet.
    pub n_rows: u64,
    /// Columns written.
    pub n_columns: usize,
    /// Rows left out as excluded.
    pub n_left_out: u64,
    /// Cells marked (changed, kept or noted).
    pub n_marked: u64,
    /// Rows of the decisions sheet.
    pub n_decisions: usize,
}

fn xerr(e: rust_xlsxwriter::XlsxError) -> Error {
    Error::Invalid(format!("cannot write the workbook: {e}"))
}

/// A sheet name Excel accepts: at most 31 characters, none of `[]:*?/\`.
fn sheet_name(name: &str) -> String {
    let clean: String = name
        .chars()
        .map(|c| if "[]:*?/\\".contains(c) { '_' } else { c })
        .take(31)
        .collect();
    if clean.is_empty() {
        "table".into()
    } else {
        clean
    }
}

/// The serial date-time that reads back as exactly `text`, if there is one.
fn as_datetime(text: &str) -> Option<ExcelDateTime> {
    let dt = ExcelDateTime::parse_from_str(text).ok()?;
    let mut back = String::new();
    crate::table::sheet::cell_text(
        &calamine::Data::DateTime(calamine::ExcelDateTime::new(
            dt.to_excel(),
            calamine::ExcelDateTimeType::DateTime,
            false,
        )),
        &mut back,
    );
    (back == text).then_some(dt)
}

/// The number that reads back as exactly `text`, if there is one.
fn as_number(text: &str) -> Option<f64> {
    let f: f64 = text.parse().ok()?;
    if !f.is_finite() {
        return None;
    }
    let mut back = String::new();
    crate::table::sheet::cell_text(&calamine::Data::Float(f), &mut back);
    (back == text).then_some(f)
}

/// Write `version` as a review workbook, returning its bytes.
pub fn export_xlsx(
    reader: &Reader<'_>,
    version: &Version,
    decisions: &[DecisionRow],
    opts: &XlsxOptions,
) -> Result<(Vec<u8>, XlsxOutcome)> {
    let keep: Vec<usize> = (0..version.header().len())
        .filter(|&i| opts.with_distrusted || !version.is_distrusted(i))
        .collect();
    // Column types, as the profile decides them (one pass over the version).
    let mut counts: Vec<KindCounts> = vec![KindCounts::default(); version.header().len()];
    version.for_each_row(reader, |row| {
        if row.excluded && !opts.with_excluded {
            return Ok(ControlFlow::Continue(()));
        }
        for (i, cell) in row.cells.iter().enumerate() {
            if let Some(t) = cell.as_deref().filter(|t| !t.trim().is_empty()) {
                counts[i].add(&classify(t));
            }
        }
        Ok(ControlFlow::Continue(()))
    })?;
    let types: Vec<InferredType> = counts.iter().map(|c| infer_type(c, 0, 0).0).collect();

    // Decisions by cell (row id as shown, column) and by row.
    let mut by_cell: HashMap<(&str, &str), Vec<&DecisionRow>> = HashMap::new();
    for d in decisions {
        if !d.row.is_empty() {
            by_cell.entry((&d.row, &d.column)).or_default().push(d);
        }
    }

    let mut book = Workbook::new();
    let bold = Format::new().set_bold();
    let date_fmt = Format::new().set_num_format("yyyy-mm-dd");
    let datetime_fmt = Format::new().set_num_format("yyyy-mm-dd\\Thh:mm:ss");
    let time_fmt = Format::new().set_num_format("hh:mm:ss");
    let fill = |base: &Format, rgb: u32| base.clone().set_background_color(Color::RGB(rgb));
    let plain = Format::new();

    let sheet = book.add_worksheet();
    sheet.set_name(sheet_name(&version.table)).map_err(xerr)?;
    for (j, &i) in keep.iter().enumerate() {
        sheet
            .write_string_with_format(0, j as u16, &version.header()[i], &bold)
            .map_err(xerr)?;
    }
    sheet.set_freeze_panes(1, 0).map_err(xerr)?;
    let mut check = VersionHashBuilder::new(version.header());
    let mut n_seen = 0u64;
    let (mut n_rows, mut n_left_out, mut n_marked) = (0u64, 0u64, 0u64);
    let mut raw_rows: Vec<(String, String, Option<String>, Option<String>)> = Vec::new();
    let mut failure: Option<Error> = None;
    version.for_each_row(reader, |row| {
        check.row(row.id, row.excluded, row.cells);
        n_seen += 1;
        if row.excluded && !opts.with_excluded {
            n_left_out += 1;
            return Ok(ControlFlow::Continue(()));
        }
        let r = u32::try_from(n_rows + 1).unwrap_or(u32::MAX);
        if r >= 1_048_576 {
            failure = Some(Error::Invalid(format!(
                "table '{}' has more rows than a worksheet holds (1,048,575 below the header); export it as CSV",
                version.table
            )));
            return Ok(ControlFlow::Break(()));
        }
        let shown = row.id.to_string();
        for (j, &i) in keep.iter().enumerate() {
            let col = j as u16;
            let text = row.cells[i].as_deref().unwrap_or("");
            let column = version.header()[i].as_str();
            let here = by_cell.get(&(shown.as_str(), column));
            let edited = version.is_edited(row.id, i);
            let mark = if edited {
                Some(CHANGED_FILL)
            } else {
                here.and_then(|list| {
                    list.iter().rev().find_map(|d| match d.fix_kind.as_str() {
                        "keep" => Some(KEPT_FILL),
                        "note" => Some(NOTED_FILL),
                        _ => None,
                    })
                })
            };
            let number = (types[i].is_numeric()
                && matches!(classify(text), CellKind::Integer(_) | CellKind::Decimal(_)))
            .then(|| as_number(text))
            .flatten();
            let date = (types[i] == InferredType::Date && number.is_none())
                .then(|| as_datetime(text))
                .flatten();
            let base = match date {
                Some(_) if text.len() == 10 => &date_fmt,
                Some(_) if text.len() <= 12 && !text.contains('-') => &time_fmt,
                Some(_) => &datetime_fmt,
                None => &plain,
            };
            let format = match mark {
                Some(rgb) => fill(base, rgb),
                None => base.clone(),
            };
            let written = if text.is_empty() {
                if mark.is_some() {
                    sheet.write_blank(r, col, &format).map(|_| ())
                } else {
                    Ok(())
                }
            } else if let Some(f) = number {
                sheet.write_number_with_format(r, col, f, &format).map(|_| ())
            } else if let Some(dt) = date {
                sheet.write_datetime_with_format(r, col, dt, &format).map(|_| ())
            } else if types[i] == InferredType::Boolean && (text == "true" || text == "false") {
                sheet
                    .write_boolean_with_format(r, col, text == "true", &format)
                    .map(|_| ())
            } else {
                sheet.write_string_with_format(r, col, text, &format).map(|_| ())
            };
            if let Err(e) = written {
                failure = Some(xerr(e));
                return Ok(ControlFlow::Break(()));
            }
            if mark.is_some() {
                n_marked += 1;
            }
            if let Some(list) = here {
                let note = Note::new(note_text(list))
                    .set_author("emend")
                    .add_author_prefix(false)
                    .set_width(360)
                    .set_height(160);
                if let Err(e) = sheet.insert_note(r, col, &note) {
                    failure = Some(xerr(e));
                    return Ok(ControlFlow::Break(()));
                }
            }
            if edited && opts.raw_values {
                let raw = list_raw(here);
                raw_rows.push((shown.clone(), column.to_string(), raw, row.cells[i].clone()));
            }
        }
        n_rows += 1;
        Ok(ControlFlow::Continue(()))
    })?;
    if let Some(e) = failure {
        return Err(e);
    }
    if let Some((hash, n)) = version.recorded(reader)?
        && (version.finish_hash(check) != hash || n != n_seen)
    {
        return Err(Error::Tampered(format!(
            "table '{}' rebuilt as of commit {} does not match the version its signed commit records",
            version.table, version.seq
        )));
    }
    sheet.autofit();

    let sheet = book.add_worksheet();
    sheet.set_name("decisions").map_err(xerr)?;
    write_decisions(sheet, decisions, &bold)?;

    if opts.raw_values {
        let sheet = book.add_worksheet();
        sheet.set_name("raw values").map_err(xerr)?;
        for (j, h) in ["row", "column", "raw", "new"].iter().enumerate() {
            sheet
                .write_string_with_format(0, j as u16, *h, &bold)
                .map_err(xerr)?;
        }
        for (k, (row, column, raw, new)) in raw_rows.iter().enumerate() {
            let r = k as u32 + 1;
            let cells = [
                Some(row.as_str()),
                Some(column.as_str()),
                raw.as_deref(),
                new.as_deref(),
            ];
            for (j, v) in cells.iter().enumerate() {
                if let Some(v) = v {
                    sheet.write_string(r, j as u16, *v).map_err(xerr)?;
                }
            }
        }
        sheet.set_freeze_panes(1, 0).map_err(xerr)?;
        sheet.autofit();
    }
    let bytes = book.save_to_buffer().map_err(xerr)?;
    Ok((
        bytes,
        XlsxOutcome {
            n_rows,
            n_columns: keep.len(),
            n_left_out,
            n_marked,
            n_decisions: decisions.len(),
        },
    ))
}

/// The raw value of a changed cell: the old value of its first edit.
fn list_raw(list: Option<&Vec<&DecisionRow>>) -> Option<String> {
    list.and_then(|l| l.iter().find(|d| d.old.is_some() || d.new.is_some()))
        .and_then(|d| d.old.clone())
}

fn shown(v: &Option<String>) -> String {
    match v {
        None => "(missing)".into(),
        Some(s) => format!("'{s}'"),
    }
}

/// A cell's note: each decision on it, oldest first.
fn note_text(list: &[&DecisionRow]) -> String {
    let mut text = String::new();
    for d in list {
        if !text.is_empty() {
            text.push_str("\n\n");
        }
        if d.old.is_some() || d.new.is_some() {
            text.push_str(&format!(
                "{}: {} → {}",
                d.fix_kind,
                shown(&d.old),
                shown(&d.new)
            ));
        } else {
            text.push_str(&d.fix_kind);
        }
        text.push_str(&format!(
            "\nwhy: {}\nby {} at {}\ncommit {}",
            d.reason,
            d.author,
            d.time,
            &d.commit[..d.commit.len().min(12)]
        ));
    }
    text
}

fn write_decisions(sheet: &mut Worksheet, rows: &[DecisionRow], bold: &Format) -> Result<()> {
    for (j, h) in DECISIONS_HEADER.iter().enumerate() {
        sheet
            .write_string_with_format(0, j as u16, *h, bold)
            .map_err(xerr)?;
    }
    for (k, d) in rows.iter().enumerate() {
        let r = k as u32 + 1;
        let evidence = d.evidence_blake3.join(" ");
        let cells: [Option<&str>; 11] = [
            Some(&d.row),
            Some(&d.column),
            d.old.as_deref(),
            d.new.as_deref(),
            Some(&d.fix_kind),
            Some(&d.reason),
            d.consulted.as_deref(),
            Some(&evidence),
            Some(&d.commit),
            Some(&d.author),
            Some(&d.time),
        ];
        for (j, v) in cells.iter().enumerate() {
            if let Some(v) = v.filter(|v| !v.is_empty()) {
                sheet.write_string(r, j as u16, v).map_err(xerr)?;
            }
        }
    }
    sheet.set_freeze_panes(1, 0).map_err(xerr)?;
    sheet.autofit();
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_values_that_read_back_exactly_become_numbers_and_dates() {
        assert_eq!(as_number("7.1"), Some(7.1));
        assert_eq!(as_number("42"), Some(42.0));
        // Leading zeros, a plus sign or an exponent would not read back the same: text.
        assert_eq!(as_number("007"), None);
        assert_eq!(as_number("+3"), None);
        assert_eq!(as_number("1e3"), None);
        assert!(as_datetime("2024-10-03").is_some());
        assert!(as_datetime("2024-10-03T14:30:00").is_some());
        assert!(as_datetime("03/10/2024").is_none());
        assert_eq!(sheet_name("a/b:c"), "a_b_c");
        assert_eq!(sheet_name(&"x".repeat(40)).len(), 31);
    }
}
