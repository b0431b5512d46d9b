//! `diff`: every changed cell, row and mark between two versions, for people, JSON or CSV.

use super::out::{self, BAD, BOLD, CHANGED, DIM, GOOD, paint};
use anyhow::{Result, bail};
use clap::Args;
use emend::query::diff::{Diff, FixRef, Piece, diff, inline};
use emend::query::{self, Rev};
use std::io::Write;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct DiffArgs {
    /// [TABLE] FROM [TO]: revisions (commit number, tag, 8+ hex digits, latest, raw); TO is
    /// latest when left out; without TABLE, every table
    #[arg(num_args = 1..=3, required = true, value_names = ["TABLE", "FROM", "TO"])]
    args: Vec<String>,
    /// Comma-separated values, one line per change, for a spreadsheet
    #[arg(long, conflicts_with_all = ["json", "by_column"])]
    csv: bool,
    /// With --csv: put an apostrophe before each cell a spreadsheet would run as a formula
    /// (starting with = + - @, tab or carriage return, and not a number). The output is then
    /// no longer the exact values
    #[arg(long, requires = "csv")]
    spreadsheet_safe: bool,
    /// How many cells changed in each column, instead of every cell
    #[arg(long, conflicts_with = "json")]
    by_column: bool,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

fn fix_ref_json(f: &Option<FixRef>) -> serde_json::Value {
    match f {
        Some(f) => {
            serde_json::json!({"seq": f.seq, "id": f.id.to_hex(), "kind": f.kind, "why": f.why})
        }
        None => serde_json::Value::Null,
    }
}

fn diff_json(d: &Diff) -> serde_json::Value {
    serde_json::json!({
        "table": d.table,
        "from_seq": d.from_seq,
        "to_seq": d.to_seq,
        "across_extracts": d.across_extracts,
        "columns_added": d.columns_added,
        "columns_removed": d.columns_removed,
        "cells": d.cells.iter().map(|c| serde_json::json!({
            "row": c.row.to_string(),
            "old_row": c.old_row.as_ref().map(|r| r.to_string()),
            "column": c.column,
            "old": c.old,
            "new": c.new,
            "fix": fix_ref_json(&c.by),
        })).collect::<Vec<_>>(),
        "rows_added": d.rows_added.iter().map(|r| serde_json::json!({"row": r.row.to_string(), "cells": r.cells})).collect::<Vec<_>>(),
        "rows_removed": d.rows_removed.iter().map(|r| serde_json::json!({"row": r.row.to_string(), "cells": r.cells})).collect::<Vec<_>>(),
        "rows_excluded": d.rows_excluded.iter().map(|m| serde_json::json!({"row": m.target.replace('\u{1f}', ","), "excluded_in_to": m.set_in_to, "fix": fix_ref_json(&m.by)})).collect::<Vec<_>>(),
        "columns_distrusted": d.columns_distrusted.iter().map(|m| serde_json::json!({"column": m.target, "distrusted_in_to": m.set_in_to, "fix": fix_ref_json(&m.by)})).collect::<Vec<_>>(),
        "stat": d.stat().iter().map(|(c, n)| serde_json::json!({"column": c, "cells": n})).collect::<Vec<_>>(),
        "index_rows_read": d.index_rows_read,
    })
}

pub(super) fn show_value(v: &Option<String>) -> String {
    out::cell(v)
}

/// old → new, with a word-level difference for long texts.
pub(super) fn change_text(old: &Option<String>, new: &Option<String>) -> String {
    match (old, new) {
        (Some(a), Some(b)) if a.chars().count() > 40 || b.chars().count() > 40 => {
            let mut s = String::new();
            for p in inline(a, b) {
                match p {
                    Piece::Same(t) => s.push_str(&t),
                    Piece::Gone(t) => s.push_str(&paint(BAD, format!("‹was: {t}›"))),
                    Piece::Came(t) => s.push_str(&paint(CHANGED, format!("‹now: {t}›"))),
                }
            }
            s
        }
        // Quoted, so a change of spaces alone can be seen: 'Heron  Pool' → 'Heron Pool'.
        _ => format!("{} → {}", out::quoted(old), out::quoted(new)),
    }
}

/// One CSV line of `diff --csv`: table, change, row, old_row, column, old, new, and the fix
/// (commit, commit id, kind, reason) when a fix made the change.
struct CsvChange<'d> {
    change: &'d str,
    row: String,
    old_row: String,
    column: String,
    old: Option<String>,
    new: Option<String>,
    by: &'d Option<FixRef>,
}

fn diff_csv_lines(d: &Diff) -> Vec<[String; 11]> {
    let none: &Option<FixRef> = &None;
    let mut changes: Vec<CsvChange<'_>> = Vec::new();
    let plain = |change: &'static str, row: String, column: String| CsvChange {
        change,
        row,
        old_row: String::new(),
        column,
        old: None,
        new: None,
        by: none,
    };
    for c in &d.cells {
        changes.push(CsvChange {
            change: "cell",
            row: c.row.to_string(),
            old_row: c
                .old_row
                .as_ref()
                .map(|r| r.to_string())
                .unwrap_or_default(),
            column: c.column.clone(),
            old: c.old.clone(),
            new: c.new.clone(),
            by: &c.by,
        });
    }
    changes.extend(
        d.rows_added
            .iter()
            .map(|r| plain("row added", r.row.to_string(), String::new())),
    );
    changes.extend(
        d.rows_removed
            .iter()
            .map(|r| plain("row removed", r.row.to_string(), String::new())),
    );
    for m in &d.rows_excluded {
        let change = if m.set_in_to {
            "row excluded"
        } else {
            "row no longer excluded"
        };
        changes.push(CsvChange {
            by: &m.by,
            ..plain(change, m.target.replace('\u{1f}', ","), String::new())
        });
    }
    for m in &d.columns_distrusted {
        let change = if m.set_in_to {
            "column distrusted"
        } else {
            "column no longer distrusted"
        };
        changes.push(CsvChange {
            by: &m.by,
            ..plain(change, String::new(), m.target.clone())
        });
    }
    changes.extend(
        d.columns_added
            .iter()
            .map(|c| plain("column added", String::new(), c.clone())),
    );
    changes.extend(
        d.columns_removed
            .iter()
            .map(|c| plain("column removed", String::new(), c.clone())),
    );
    changes
        .into_iter()
        .map(|c| {
            let (seq, id, kind, why) = match c.by {
                Some(f) => (
                    f.seq.to_string(),
                    f.id.to_hex(),
                    f.kind.clone(),
                    f.why.clone(),
                ),
                None => Default::default(),
            };
            [
                d.table.clone(),
                c.change.to_string(),
                c.row,
                c.old_row,
                c.column,
                c.old.unwrap_or_default(),
                c.new.unwrap_or_default(),
                seq,
                id,
                kind,
                why,
            ]
        })
        .collect()
}

fn csv_line(o: &mut dyn Write, fields: &[String]) -> Result<()> {
    emend::table::csv::write_record(o, fields.iter().map(|f| f.as_bytes()), b',', false, false)?;
    Ok(())
}

pub fn diff_cmd(cx: &CliContext, a: DiffArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let names = reader.table_names()?;
    let latest = "latest".to_string();
    // A first word that names a table is the table ('diff samples raw' is raw → latest).
    let (tables, from, to) = match a.args.as_slice() {
        [t, f, to] => (vec![t.clone()], f, to),
        [t, f] if names.contains(t) => (vec![t.clone()], f, &latest),
        [f, to] => (names, f, to),
        [f] => (names, f, &latest),
        _ => bail!("diff takes [TABLE] FROM [TO]"),
    };
    let from_rev = query::resolve(&reader, from)?;
    let to_rev = query::resolve(&reader, to)?;
    let mut diffs = Vec::new();
    for t in &tables {
        if reader
            .extract_at(t, from_rev.seq.min(to_rev.seq))?
            .is_none()
            && tables.len() > 1
        {
            continue;
        }
        diffs.push(diff(&reader, t, from_rev, to_rev)?);
    }
    if a.json {
        out::json(
            &serde_json::json!({"from": from, "to": to, "tables": diffs.iter().map(diff_json).collect::<Vec<_>>()}),
        )?;
        return Ok(0);
    }
    if a.csv {
        // Data, not text for people: exact bytes to a pipe or file (the styled stream would
        // strip escape sequences from the values), escaped only on a terminal.
        let mut o = out::data_stdout();
        let safe = a.spreadsheet_safe;
        let mut n_formulas = 0u64;
        let mut line = |o: &mut dyn Write, fields: &[String]| -> Result<()> {
            let fields: Vec<String> = fields
                .iter()
                .map(|f| {
                    if emend::values::looks_like_formula(f) {
                        n_formulas += 1;
                        if safe {
                            return emend::values::defuse_formula(f);
                        }
                    }
                    f.clone()
                })
                .collect();
            csv_line(o, &fields)
        };
        line(
            &mut *o,
            &[
                "table",
                "change",
                "row",
                "old_row",
                "column",
                "old",
                "new",
                "commit",
                "commit_id",
                "fix",
                "why",
            ]
            .map(String::from),
        )?;
        for d in &diffs {
            for l in diff_csv_lines(d) {
                line(&mut *o, &l)?;
            }
        }
        o.flush()?;
        drop(o);
        super::export::warn_formulas(n_formulas, safe)?;
        return Ok(0);
    }
    let mut o = out::stdout();
    let label = |r: &Rev, s: u64| {
        if r.raw {
            format!("raw (commit {s})")
        } else {
            format!("commit {s}")
        }
    };
    let q = emend::model::quantity;
    for d in &diffs {
        // The summary names only what happened, in words.
        let mut parts = vec![format!(
            "{} edited",
            q(d.cells.len() as u64, "cell", "cells")
        )];
        for (n, one, many) in [
            (d.rows_added.len(), "new row", "new rows"),
            (d.rows_removed.len(), "row gone", "rows gone"),
            (
                d.rows_excluded.len(),
                "change of exclusion",
                "changes of exclusion",
            ),
            (
                d.columns_distrusted.len(),
                "change of trust in a column",
                "changes of trust in columns",
            ),
        ] {
            if n > 0 {
                parts.push(q(n as u64, one, many));
            }
        }
        writeln!(
            o,
            "{} from {} to {}{}: {}",
            paint(BOLD, &d.table),
            label(&from_rev, d.from_seq),
            label(&to_rev, d.to_seq),
            if d.across_extracts {
                ", across extracts"
            } else {
                ""
            },
            parts.join(", ")
        )?;
        if a.by_column {
            for (c, n) in d.stat() {
                writeln!(
                    o,
                    "  {c:24} {n:>8} {}",
                    if n == 1 { "cell" } else { "cells" }
                )?;
            }
            continue;
        }
        for c in &d.columns_added {
            writeln!(o, "  column added: {c}")?;
        }
        for c in &d.columns_removed {
            writeln!(o, "  column removed: {c}")?;
        }
        if !d.cells.is_empty() {
            let header: Vec<String> = ["row", "column", "change", "commit", "why"]
                .iter()
                .map(|s| s.to_string())
                .collect();
            let rows: Vec<Vec<(String, Option<anstyle::Style>)>> = d
                .cells
                .iter()
                .map(|c| {
                    let row = match &c.old_row {
                        Some(old) => format!("{} (was {old})", c.row),
                        None => c.row.to_string(),
                    };
                    vec![
                        (row, Some(BOLD)),
                        (c.column.clone(), None),
                        (change_text(&c.old, &c.new), None),
                        (
                            c.by.as_ref().map(|f| f.seq.to_string()).unwrap_or_default(),
                            Some(DIM),
                        ),
                        (
                            c.by.as_ref().map(|f| f.why.clone()).unwrap_or_default(),
                            None,
                        ),
                    ]
                })
                .collect();
            let text = out::table(&header, &rows, 200);
            for line in text.lines() {
                writeln!(o, "  {line}")?;
            }
        }
        for (rows, word, style) in [
            (&d.rows_added, "new row", GOOD),
            (&d.rows_removed, "row gone", BAD),
        ] {
            for r in rows {
                writeln!(
                    o,
                    "  {} {}: {}",
                    paint(style, word),
                    out::clean(&r.row.to_string()),
                    r.cells
                        .iter()
                        .map(show_value)
                        .collect::<Vec<_>>()
                        .join(" | ")
                )?;
            }
        }
        for m in &d.rows_excluded {
            let what = if m.set_in_to {
                "excluded"
            } else {
                "no longer excluded"
            };
            writeln!(
                o,
                "  row {} {what}{}",
                m.target.replace('\u{1f}', ","),
                m.by.as_ref()
                    .map(|f| format!(" (commit {}: {})", f.seq, f.why))
                    .unwrap_or_default()
            )?;
        }
        for m in &d.columns_distrusted {
            let what = if m.set_in_to {
                "distrusted"
            } else {
                "no longer distrusted"
            };
            writeln!(
                o,
                "  column {} {what}{}",
                m.target,
                m.by.as_ref()
                    .map(|f| format!(" (commit {}: {})", f.seq, f.why))
                    .unwrap_or_default()
            )?;
        }
        if d.is_empty() {
            writeln!(o, "  no differences")?;
        }
    }
    Ok(0)
}
