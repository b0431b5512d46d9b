//! `why`: the life of one value, row or column, from the raw extract to a revision.

use super::out::{self, BAD, BOLD, DIM, GOOD, paint};
use anyhow::{Result, bail};
use clap::Args;
use emend::query::why::{FixEvent, why_cell, why_column, why_row};
use emend::query::{self};
use emend::signing::fingerprint;
use std::io::Write;

use super::context::CliContext;
use super::diff::{change_text, show_value};

#[derive(Args, Debug)]
pub struct WhyArgs {
    /// Table
    table: String,
    /// Row (key value, or 1-based position without a key); leave out with --col
    row: Option<String>,
    /// Column: with ROW, the life of one cell; alone, the column's history
    column: Option<String>,
    /// The column's history: every fix that names it or changed a cell of it
    #[arg(long = "col", value_name = "COLUMN", conflicts_with = "column")]
    col: Option<String>,
    /// Tell the story up to this revision (default latest)
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

fn event_json(e: &FixEvent) -> serde_json::Value {
    serde_json::json!({
        "seq": e.seq,
        "id": e.id.to_hex(),
        "author": {"name": e.author.name, "email": e.author.email, "fingerprint": fingerprint(&e.author.key)},
        "time": e.time,
        "message": e.message,
        "kind": e.kind,
        "description": e.description,
        "column": e.column,
        "why": e.why,
        "consulted": e.consulted,
        "evidence": e.evidence.iter().map(|v| serde_json::json!({"name": v.name, "blake3": v.blob.to_hex(), "bytes": v.n_bytes})).collect::<Vec<_>>(),
        "old": e.old,
        "new": e.new,
        "carried_from": e.origins.iter().map(|x| serde_json::json!({"seq": x.seq, "id": x.id.to_hex(), "fix_index": x.fix_idx})).collect::<Vec<_>>(),
        "signature_valid": e.signature_ok,
        "signer_trusted": e.trusted,
    })
}

fn print_event(o: &mut dyn Write, e: &FixEvent, with_change: bool) -> Result<()> {
    let seal = match (e.signature_ok, e.trusted) {
        (true, true) => paint(GOOD, "signature valid, trusted signer"),
        (true, false) => paint(BAD, "signature valid, UNTRUSTED signer"),
        (false, _) => paint(BAD, "SIGNATURE DOES NOT VERIFY"),
    };
    writeln!(
        o,
        "  {} {}  {}  {} {}",
        paint(BOLD, format!("commit {}", e.seq)),
        paint(DIM, e.id.short()),
        e.time,
        e.author.name,
        paint(DIM, format!("({})", fingerprint(&e.author.key)))
    )?;
    if with_change {
        let col = e
            .column
            .as_deref()
            .map(|c| format!("{c}: "))
            .unwrap_or_default();
        writeln!(o, "    {} {col}{}", e.kind, change_text(&e.old, &e.new))?;
        if e.kind != "set" {
            writeln!(o, "    fix: {}", e.description)?;
        }
    } else {
        writeln!(o, "    {}", e.description)?;
    }
    writeln!(o, "    why: {}", e.why)?;
    if !e.origins.is_empty() {
        let chain: Vec<String> = e
            .origins
            .iter()
            .map(|x| format!("commit {}", x.seq))
            .collect();
        // An answer to a carried conflict has a reason of its own, given in this commit.
        let answer = e.why.starts_with(emend::ledger::carry::ANSWER_PREFIX)
            || e.why.starts_with("carried conflict left open");
        writeln!(
            o,
            "    carried from {}{}",
            chain.join(" via "),
            if answer {
                " (the reason above was given when the conflict was answered)"
            } else {
                " (the reason was given there)"
            }
        )?;
    }
    if let Some(c) = &e.consulted {
        writeln!(o, "    consulted: {c}")?;
    }
    for v in &e.evidence {
        writeln!(
            o,
            "    evidence: {} (blake3 {}, {} bytes)",
            v.name,
            v.blob.to_hex(),
            v.n_bytes
        )?;
    }
    writeln!(o, "    {seal}")?;
    Ok(())
}

pub fn why_cmd(cx: &CliContext, a: WhyArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    let mut o = out::stdout();
    // `why TABLE COLUMN`: a lone word that names a column and no row is the column.
    let mut a = a;
    if a.column.is_none()
        && a.col.is_none()
        && let Some(word) = a.row.clone()
    {
        let v = query::Version::load(&reader, &a.table, rev.seq, rev.raw)?;
        if v.col_idx(&word).is_ok() {
            a.col = Some(word);
            a.row = None;
        }
    }
    if let Some(col) = a.col.as_deref().filter(|_| a.row.is_none()) {
        let (ingest_seq, list) = why_column(&reader, &a.table, col, rev)?;
        if a.json {
            out::json(
                &serde_json::json!({"table": a.table, "column": col, "extract_commit": ingest_seq, "fixes": list.iter().map(|(e, n)| {
                let mut v = event_json(e);
                v.as_object_mut().expect("object").insert("cells_changed".into(), (*n).into());
                v
            }).collect::<Vec<_>>()}),
            )?;
            return Ok(0);
        }
        writeln!(
            o,
            "{} column {} since its extract (commit {ingest_seq})",
            paint(BOLD, &a.table),
            paint(BOLD, col)
        )?;
        if list.is_empty() {
            writeln!(o, "  no fix named this column or changed a cell of it")?;
        }
        for (e, n) in &list {
            print_event(&mut o, e, false)?;
            writeln!(
                o,
                "    {} changed",
                emend::model::quantity(*n as u64, "cell", "cells")
            )?;
        }
        return Ok(0);
    }
    let Some(row_text) = a.row.as_deref() else {
        bail!("give ROW [COLUMN], or --col COLUMN");
    };
    let row = query::parse_row(&reader, &a.table, row_text)?;
    let column = a.column.as_deref().or(a.col.as_deref());
    let Some(column) = column else {
        let (ingest_seq, list) = why_row(&reader, &a.table, &row, rev)?;
        if a.json {
            out::json(
                &serde_json::json!({"table": a.table, "row": row.to_string(), "extract_commit": ingest_seq, "fixes": list.iter().map(event_json).collect::<Vec<_>>()}),
            )?;
            return Ok(0);
        }
        writeln!(
            o,
            "{} row {} since its extract (commit {ingest_seq})",
            paint(BOLD, &a.table),
            paint(BOLD, &row)
        )?;
        if list.is_empty() {
            writeln!(o, "  no fix touched this row")?;
        }
        for e in &list {
            print_event(&mut o, e, e.old.is_some() || e.new.is_some())?;
        }
        return Ok(0);
    };
    let story = why_cell(&reader, &a.table, &row, column, rev)?;
    if a.json {
        out::json(&serde_json::json!({
            "table": story.table,
            "row": story.row.to_string(),
            "column": story.column,
            "extract_commit": story.ingest_seq,
            "extract_file": story.extract_file,
            "raw": story.raw,
            "fixes": story.events.iter().map(event_json).collect::<Vec<_>>(),
            "at_seq": story.at_seq,
            "value": story.value,
            "row_excluded_by": story.row_excluded_by.as_ref().map(event_json),
            "column_distrusted_by": story.column_distrusted_by.as_ref().map(event_json),
            "decisions": story.decisions.iter().map(event_json).collect::<Vec<_>>(),
        }))?;
        return Ok(0);
    }
    writeln!(
        o,
        "{} row {} column {}",
        paint(BOLD, &story.table),
        paint(BOLD, &story.row),
        paint(BOLD, &story.column)
    )?;
    writeln!(
        o,
        "  raw value {} (extract {}, commit {})",
        paint(BOLD, show_value(&story.raw)),
        story.extract_file,
        story.ingest_seq
    )?;
    if story.events.is_empty() {
        writeln!(o, "  no fix changed this cell")?;
    }
    for e in &story.events {
        print_event(&mut o, e, true)?;
    }
    if let Some(e) = &story.row_excluded_by {
        writeln!(o, "  the row is excluded:")?;
        print_event(&mut o, e, false)?;
    }
    if let Some(e) = &story.column_distrusted_by {
        writeln!(o, "  the column is distrusted:")?;
        print_event(&mut o, e, false)?;
    }
    for e in &story.decisions {
        let what = if e.kind == "keep" {
            "the value is kept on purpose:"
        } else {
            "a note for review:"
        };
        writeln!(o, "  {what}")?;
        print_event(&mut o, e, false)?;
    }
    writeln!(
        o,
        "  value at commit {}: {}",
        story.at_seq,
        paint(BOLD, show_value(&story.value))
    )?;
    // A carried fix that met this cell changed at source: a decision still owed.
    let open = reader.conflicts()?;
    for c in &open {
        let i = c.id;
        if c.conflict.fix.table != story.table {
            continue;
        }
        for x in &c.conflict.cells {
            if x.row == story.row && x.column == story.column {
                writeln!(
                    o,
                    "  {} {}: carried fix '{}' changed {} to {} on an earlier extract; this extract holds {}",
                    paint(BAD, "open conflict"),
                    i,
                    c.conflict.fix.action.describe(),
                    super::out::quoted(&x.was),
                    super::out::quoted(&x.fixed),
                    super::out::quoted(&x.now)
                )?;
                writeln!(
                    o,
                    "    answer it with 'emend resolve {} --apply | --keep-source | --set VALUE | --missing | --defer --why \"...\"'",
                    i
                )?;
            }
        }
    }
    Ok(0)
}
