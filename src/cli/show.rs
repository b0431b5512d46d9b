//! Read-only commands that print a store: `tables`, `show` and `log`.

use super::out::{self, BOLD, CHANGED, DIM, paint};
use anyhow::Result;
use clap::Args;
use emend::model::{Change, CommitBody};
use emend::query::{self, Rev};
use emend::signing::fingerprint;
use std::io::Write;
use std::ops::ControlFlow;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct ShowArgs {
    /// Table
    table: String,
    /// One row: its key, or #N for the row at position N
    #[arg(conflicts_with_all = ["rows", "condition"])]
    row: Option<String>,
    /// The rows where a condition holds ('ph above 14'; the words of the rules file), at most 50
    #[arg(long = "where", value_name = "CONDITION", conflicts_with = "rows")]
    condition: Option<String>,
    /// Revision: commit number, tag, 8+ hex digits of an id, 'latest' (default) or 'raw'
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// Rows by 1-based position, e.g. 1-20 or 41; or by key or #N, comma-separated, as the
    /// fixes take them
    #[arg(long, default_value = "1-20", value_name = "A-B")]
    rows: String,
    /// Only these columns, comma-separated
    #[arg(long, value_delimiter = ',', value_name = "COLS")]
    cols: Vec<String>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

#[derive(Args, Debug)]
pub struct LogArgs {
    /// Only commits that change this table
    table: Option<String>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

fn parse_rows(text: &str) -> Result<(u64, u64)> {
    let bad = || {
        anyhow::anyhow!("--rows takes A-B or N with 1-based positions, e.g. 1-20 (got '{text}')")
    };
    let (a, b) = match text.split_once('-') {
        Some((a, b)) => (
            a.trim().parse::<u64>().map_err(|_| bad())?,
            b.trim().parse::<u64>().map_err(|_| bad())?,
        ),
        None => {
            let n = text.trim().parse::<u64>().map_err(|_| bad())?;
            (n, n)
        }
    };
    if a == 0 || b < a {
        return Err(bad());
    }
    Ok((a, b))
}

pub(super) fn rev_label(rev: &Rev) -> String {
    if rev.raw {
        "raw".into()
    } else {
        format!("commit {}", rev.seq)
    }
}

pub fn tables(cx: &CliContext, json: bool) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let mut list = Vec::new();
    for name in reader.table_names()? {
        let v = query::version_at(
            &reader,
            &name,
            Rev {
                seq: head,
                raw: false,
            },
        )?;
        let n_extracts = reader.extracts_of(&name)?.len();
        list.push((name, v, n_extracts));
    }
    if json {
        let items: Vec<serde_json::Value> = list
            .iter()
            .map(|(name, v, n)| {
                serde_json::json!({
                    "table": name,
                    "rows": v.def.n_rows,
                    "columns": v.def.header,
                    "key": v.def.key,
                    "extract": v.def.extract.to_hex(),
                    "extract_file": v.def.file_name,
                    "extract_commit": v.ingest_seq,
                    "extracts": n,
                    "edited_cells": v.n_edited(),
                    "excluded_rows": v.n_excluded(),
                    "distrusted_columns": v.header().iter().enumerate().filter(|(i, _)| v.is_distrusted(*i)).map(|(_, h)| h.clone()).collect::<Vec<_>>(),
                })
            })
            .collect();
        out::json(&serde_json::json!({ "tables": items }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    if list.is_empty() {
        writeln!(o, "no tables yet: emend ingest FILE --table NAME")?;
        return Ok(0);
    }
    let header: Vec<String> = [
        "table",
        "rows",
        "cols",
        "key",
        "extract",
        "edited cells",
        "excluded",
        "distrusted",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let rows: Vec<Vec<(String, Option<anstyle::Style>)>> = list
        .iter()
        .map(|(name, v, n)| {
            let distrusted = (0..v.header().len())
                .filter(|&i| v.is_distrusted(i))
                .count();
            vec![
                (name.clone(), Some(BOLD)),
                (v.def.n_rows.to_string(), None),
                (v.header().len().to_string(), None),
                (
                    if v.def.key.is_empty() {
                        "(position)".into()
                    } else {
                        v.def.key.join(",")
                    },
                    None,
                ),
                (
                    format!(
                        "{} ({}, commit {}, {} in all)",
                        v.def.file_name,
                        v.def.extract.short(),
                        v.ingest_seq,
                        n
                    ),
                    None,
                ),
                (v.n_edited().to_string(), None),
                (v.n_excluded().to_string(), None),
                (distrusted.to_string(), None),
            ]
        })
        .collect();
    write!(o, "{}", out::table(&header, &rows, 60))?;
    Ok(0)
}

pub fn show(cx: &CliContext, a: ShowArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    let v = query::version_at(&reader, &a.table, rev)?;
    // Which rows: by key or #N (one, or --rows K1,K2 as the fixes take them), those a
    // condition picks, or a range of positions.
    let (range, listed) = match (&a.row, parse_rows(&a.rows)) {
        (Some(text), _) => (
            (0, 0),
            Some(query::parse_rows(
                &reader,
                &a.table,
                std::slice::from_ref(text),
            )?),
        ),
        (None, Ok(r)) => (r, None),
        // A range written wrong stays a range error; anything else may name rows.
        (None, Err(e))
            if a.rows
                .chars()
                .all(|c| c.is_ascii_digit() || c == '-' || c.is_whitespace()) =>
        {
            return Err(e);
        }
        (None, Err(e)) => {
            let texts: Vec<String> = a
                .rows
                .split(',')
                .map(str::trim)
                .filter(|t| !t.is_empty())
                .map(str::to_owned)
                .collect();
            match query::parse_rows(&reader, &a.table, &texts) {
                Ok(ids) if !ids.is_empty() => ((0, 0), Some(ids)),
                _ => return Err(e),
            }
        }
    };
    let (from, to) = range;
    let wanted: Option<std::collections::HashSet<emend::model::RowId>> =
        listed.as_ref().map(|l| l.iter().cloned().collect());
    let one: Option<emend::model::RowId> = listed.as_ref().and_then(|l| l.first().cloned());
    let condition = match &a.condition {
        Some(text) => {
            let clauses = emend::checks::parse_condition(text)
                .map_err(|e| anyhow::anyhow!("--where '{text}': {e}"))?;
            Some(
                emend::checks::Condition::new(&clauses, v.header()).map_err(|column| {
                    emend::Error::UnknownColumn {
                        table: v.table.clone(),
                        column,
                    }
                })?,
            )
        }
        None => None,
    };
    const WHERE_LIMIT: usize = 50;
    let mut matched = 0usize;
    // Kept values and notes, to mark in the table.
    let mut kept: std::collections::HashSet<String> = std::collections::HashSet::new();
    let mut noted: std::collections::HashSet<String> = std::collections::HashSet::new();
    if !v.raw {
        for m in reader.marks(&v.table, v.ingest_seq, v.seq)? {
            match m.kind.as_str() {
                "keep" => {
                    kept.insert(m.target);
                }
                "note" => {
                    noted.insert(m.target);
                }
                _ => {}
            }
        }
    }
    let cell_key =
        |row: &emend::model::RowId, col: &str| emend::model::cell_target(row.as_str(), col);
    let cols: Vec<usize> = if a.cols.is_empty() {
        (0..v.header().len()).collect()
    } else {
        a.cols
            .iter()
            .map(|c| v.col_idx(c.trim()))
            .collect::<emend::Result<_>>()?
    };
    let mut picked = Vec::new();
    let listed_ids: Vec<emend::model::RowId> = listed.clone().unwrap_or_default();
    // Rows by key or position are found through the row map; a condition reads every row.
    let pick = match (&listed, &condition) {
        (Some(_), _) => Some(query::Pick::Ids(&listed_ids)),
        (None, None) => Some(query::Pick::Positions(from, to)),
        (None, Some(_)) => None,
    };
    let visit = |row: &query::RowView<'_>| {
        let take = match (&wanted, &condition) {
            (Some(ids), _) => ids.contains(row.id),
            (None, Some(c)) => {
                if c.holds(row.cells) {
                    matched += 1;
                    matched <= WHERE_LIMIT
                } else {
                    false
                }
            }
            (None, None) => {
                if row.pos > to {
                    return Ok(ControlFlow::Break(()));
                }
                row.pos >= from
            }
        };
        if take {
            let edited: Vec<char> = cols
                .iter()
                .map(|&c| {
                    let name = &v.header()[c];
                    if v.is_edited(row.id, c) {
                        '*'
                    } else if kept.contains(&cell_key(row.id, name)) {
                        '='
                    } else if noted.contains(&cell_key(row.id, name))
                        || noted.contains(row.id.as_str())
                    {
                        '!'
                    } else {
                        ' '
                    }
                })
                .collect();
            picked.push((
                row.pos,
                row.id.clone(),
                row.excluded,
                cols.iter()
                    .map(|&c| row.cells[c].clone())
                    .collect::<Vec<_>>(),
                edited,
            ));
        }
        Ok(ControlFlow::Continue(()))
    };
    match &pick {
        Some(p) => v.for_each_picked(&reader, p, visit)?,
        None => v.for_each_row(&reader, visit)?,
    }
    if let Some(l) = &listed
        && let Some(id) = l.iter().find(|id| !picked.iter().any(|p| p.1 == **id))
    {
        return Err(emend::Error::UnknownRow {
            table: v.table.clone(),
            row: id.to_string(),
        }
        .into());
    }
    if a.json {
        let rows: Vec<serde_json::Value> = picked
            .iter()
            .map(|(pos, id, ex, cells, _)| serde_json::json!({"position": pos, "row": id.to_string(), "excluded": ex, "cells": cells}))
            .collect();
        out::json(&serde_json::json!({
            "table": v.table,
            "revision": {"seq": rev.seq, "raw": rev.raw},
            "columns": cols.iter().map(|&c| v.header()[c].clone()).collect::<Vec<_>>(),
            "distrusted": cols.iter().map(|&c| v.is_distrusted(c)).collect::<Vec<_>>(),
            "rows": rows,
        }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    let which = match (&one, &a.condition) {
        (Some(id), _) if listed.as_ref().is_some_and(|l| l.len() == 1) => format!("row {id}"),
        (Some(_), _) => format!(
            "{} chosen",
            emend::model::quantity(picked.len() as u64, "row", "rows")
        ),
        (None, Some(text)) if matched > WHERE_LIMIT => {
            format!("the first {WHERE_LIMIT} of {matched} rows where {text}")
        }
        (None, Some(text)) => format!(
            "{} where {text}",
            emend::model::quantity(matched as u64, "row", "rows")
        ),
        (None, None) => format!("rows {}-{}", from, to.min(v.def.n_rows)),
    };
    writeln!(
        o,
        "{} at {} — {which} of {}",
        paint(BOLD, &v.table),
        rev_label(&rev),
        v.def.n_rows
    )?;
    let mut header = vec!["#".to_string()];
    header.extend(cols.iter().map(|&c| {
        if v.is_distrusted(c) {
            format!("{} (distrusted)", v.header()[c])
        } else {
            v.header()[c].clone()
        }
    }));
    let rows: Vec<Vec<(String, Option<anstyle::Style>)>> = picked
        .iter()
        .map(|(pos, _, excluded, cells, edited)| {
            let mut r = vec![(
                if *excluded {
                    format!("{pos} excluded")
                } else {
                    pos.to_string()
                },
                Some(DIM),
            )];
            for (c, mark) in cells.iter().zip(edited) {
                let style = if *excluded || c.is_none() {
                    Some(DIM)
                } else if *mark == '*' {
                    Some(CHANGED)
                } else {
                    None
                };
                // The mark is in the text too, not in colour alone.
                let text = if *mark == ' ' {
                    out::cell(c)
                } else {
                    format!("{}{mark}", out::cell(c))
                };
                r.push((text, style));
            }
            r
        })
        .collect();
    let (text, shown) = out::table_within(&header, &rows, 32, out::terminal_width());
    write!(o, "{text}")?;
    if shown < header.len() {
        let hidden: Vec<&str> = cols[shown - 1..]
            .iter()
            .map(|&c| v.header()[c].as_str())
            .collect();
        writeln!(
            o,
            "{}",
            paint(
                DIM,
                format!(
                    "not shown, the terminal is too narrow: {} (choose with --cols, or pipe the output for every column)",
                    hidden.join(", ")
                )
            )
        )?;
    }
    if picked.is_empty() {
        writeln!(
            o,
            "{}",
            if a.condition.is_some() {
                "(no row meets the condition)"
            } else {
                "(no rows in that range)"
            }
        )?;
    }
    let used: std::collections::BTreeSet<char> = picked
        .iter()
        .flat_map(|(_, _, _, _, marks)| marks.iter().copied())
        .filter(|m| *m != ' ')
        .collect();
    if !used.is_empty() {
        let words: Vec<&str> = used
            .iter()
            .map(|m| match m {
                '*' => "* set by a fix",
                '=' => "= kept on purpose",
                _ => "! noted for review",
            })
            .collect();
        writeln!(o, "{}", paint(DIM, words.join("   ")))?;
    }
    Ok(0)
}

/// One line summarising what a commit records.
pub fn summary(body: &CommitBody) -> String {
    match &body.change {
        Change::Ingest(r) => format!(
            "ingest {} into {}: {} rows × {} columns",
            r.file_name,
            r.table,
            r.n_rows,
            r.header.len()
        ),
        Change::Tag(t) => format!("tag {} on commit {}", t.name, t.target_seq),
        Change::Trust(t) => format!("trust key {} ({}): {}", fingerprint(&t.key), t.name, t.why),
        Change::Revoke(r) => format!("withdraw trust from key {}: {}", fingerprint(&r.key), r.why),
        Change::Fixes(list) => {
            let cells = emend::model::net_cells(list);
            format!(
                "{} to {}, {} changed",
                emend::model::quantity(list.len() as u64, "fix", "fixes"),
                body.tables().join(", "),
                emend::model::quantity(cells, "cell", "cells")
            )
        }
    }
}

pub fn log(cx: &CliContext, a: LogArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let trusted = reader.trust_list()?;
    let tags = reader.tags()?;
    if let Some(t) = &a.table
        && reader.extract_at(t, u64::MAX)?.is_none()
    {
        return Err(emend::Error::UnknownTable(t.clone()).into());
    }
    let entries: Vec<_> = query::log(&reader)?
        .into_iter()
        .filter(|(_, b)| a.table.as_deref().is_none_or(|t| b.tables().contains(&t)))
        .collect();
    if a.json {
        let items: Vec<serde_json::Value> = entries
            .iter()
            .map(|(c, b)| {
                let mut v = serde_json::json!({
                    "seq": c.seq,
                    "id": c.id.to_hex(),
                    "parent": b.parent.map(|p| p.to_hex()),
                    "time": b.time,
                    "author": {"name": b.author.name, "email": b.author.email, "key": data_encoding::HEXLOWER.encode(&b.author.key), "fingerprint": fingerprint(&b.author.key), "trusted": trusted.trusts(&b.author.key, c.seq)},
                    "message": b.message,
                    "tables": b.tables(),
                    "versions": b.versions.iter().map(|tv| serde_json::json!({"table": tv.table, "hash": tv.hash.to_hex(), "rows": tv.n_rows})).collect::<Vec<_>>(),
                });
                let obj = v.as_object_mut().expect("object");
                match &b.change {
                    Change::Revoke(r) => {
                        obj.insert("kind".into(), "revoke".into());
                        obj.insert("revoke".into(), serde_json::json!({"key": data_encoding::HEXLOWER.encode(&r.key), "fingerprint": fingerprint(&r.key), "why": r.why}));
                    }
                    Change::Trust(t) => {
                        obj.insert("kind".into(), "trust".into());
                        obj.insert("trust".into(), serde_json::json!({"key": data_encoding::HEXLOWER.encode(&t.key), "fingerprint": fingerprint(&t.key), "name": t.name, "email": t.email, "why": t.why}));
                    }
                    Change::Tag(t) => {
                        obj.insert("kind".into(), "tag".into());
                        obj.insert("tag".into(), serde_json::json!({"name": t.name, "target_seq": t.target_seq, "target_id": t.target.to_hex()}));
                    }
                    Change::Ingest(r) => {
                        obj.insert("kind".into(), "ingest".into());
                        obj.insert("extract".into(), serde_json::json!({"table": r.table, "file": r.file_name, "blake3": r.extract.to_hex(), "bytes": r.n_bytes, "rows": r.n_rows, "columns": r.header, "key": r.key}));
                    }
                    Change::Fixes(list) => {
                        obj.insert("kind".into(), "fixes".into());
                        obj.insert("fixes".into(), list.iter().map(|r| {
                            let mut f = super::fixes::fix_json(&r.fix, None);
                            f.as_object_mut().expect("object").insert("cells_changed".into(), r.edits.len().into());
                            f
                        }).collect::<Vec<_>>().into());
                    }
                }
                v
            })
            .collect();
        out::json(&serde_json::json!({ "commits": items }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    if entries.is_empty() {
        writeln!(o, "no commits yet")?;
    }
    for (c, b) in &entries {
        let email = b
            .author
            .email
            .as_deref()
            .map(|e| format!(" <{e}>"))
            .unwrap_or_default();
        let trust = if trusted.trusts(&b.author.key, c.seq) {
            ""
        } else {
            " (untrusted key)"
        };
        // The number and the date lead, then the message; who signed, and the fixes, below.
        let when = b.time.replacen('T', " ", 1);
        let when = when.strip_suffix('Z').unwrap_or(&when);
        writeln!(
            o,
            "{}  {}  {}",
            paint(BOLD, format!("No. {}", c.seq)),
            when,
            paint(BOLD, out::clean(&b.message))
        )?;
        let names: Vec<&str> = tags
            .iter()
            .filter(|(_, _, target)| *target == c.seq)
            .map(|(n, _, _)| n.as_str())
            .collect();
        if !names.is_empty() {
            writeln!(o, "    tagged {}", paint(BOLD, names.join(", ")))?;
        }
        writeln!(
            o,
            "    {}",
            paint(
                DIM,
                format!(
                    "signed by {}{} · key {}{} · id {}",
                    out::clean(&b.author.name),
                    out::clean(&email),
                    fingerprint(&b.author.key),
                    trust,
                    c.id.short()
                )
            )
        )?;
        writeln!(o, "    {}", summary(b))?;
        if let Change::Fixes(list) = &b.change {
            for (i, r) in list.iter().enumerate() {
                writeln!(
                    o,
                    "      {}.{} {} — {}{}",
                    c.seq,
                    i + 1,
                    r.fix.action.describe(),
                    r.fix.why,
                    out::cells_changed(&r.fix.action, r.edits.len())
                        .map(|t| format!(" ({t})"))
                        .unwrap_or_default()
                )?;
            }
        }
    }
    Ok(0)
}
