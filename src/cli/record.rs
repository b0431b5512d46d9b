//! Commands that write history: init, ingest, status, discard, commit.

use super::identity;
use super::out::{self, BAD, BOLD, DIM, GOOD, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::history;
use emend::ingest::IngestOptions;
use emend::model::{Change, TextEncoding};
use emend::signing::fingerprint;
use std::io::Write;
use std::path::PathBuf;

#[derive(Args, Debug)]
pub struct IngestArgs {
    /// The extract: a CSV or TSV file, kept byte for byte
    file: PathBuf,
    /// Table name (letters, digits, '_', '-', '.')
    #[arg(long, short = 't')]
    table: String,
    /// Key column(s) that name each row, comma-separated; without a key rows are named by
    /// position. A later extract of a table reuses its key
    #[arg(long, value_delimiter = ',')]
    key: Vec<String>,
    /// Field delimiter (one character, or 'tab'); guessed when not given
    #[arg(long)]
    delimiter: Option<String>,
    /// Text encoding: utf-8 (default), windows-1252 or latin-1
    #[arg(long)]
    encoding: Option<String>,
    /// Commit message
    #[arg(long, short = 'm')]
    message: Option<String>,
}

#[derive(Args, Debug)]
pub struct CommitArgs {
    /// What this set of fixes does
    #[arg(long, short = 'm')]
    message: String,
}

pub fn init() -> Result<i32> {
    let cwd = std::env::current_dir()?;
    let now = super::now()?;
    let mut store = emend::store::Store::init(&cwd, &now)?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} empty store in {}",
        paint(GOOD, "made"),
        store.path().display()
    )?;
    match identity::try_load(&identity::home()?)? {
        Some(id) => {
            let key = id.signer.public_key();
            history::trust(&mut store, &key, &id.name, id.email.as_deref(), &now)?;
            writeln!(
                o,
                "  trusts {} (key {})",
                paint(BOLD, &id.name),
                fingerprint(&key)
            )?;
        }
        None => {
            writeln!(
                o,
                "  no signing identity yet: make one with 'emend id new --name \"Your Name\"'; the first key to commit here becomes trusted"
            )?;
        }
    }
    writeln!(o, "  next: emend ingest FILE --table NAME --key COLUMN")?;
    Ok(0)
}

fn parse_delimiter(text: &str) -> Result<u8> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        t if t.len() == 1 && t.is_ascii() && !matches!(t, "\"" | "\n" | "\r") => {
            Ok(t.as_bytes()[0])
        }
        _ => bail!(
            "--delimiter must be one ASCII character other than a quote or line end, or 'tab' (got '{text}')"
        ),
    }
}

pub fn ingest(args: IngestArgs) -> Result<i32> {
    let mut store = super::open_store()?;
    let id = identity::load()?;
    let encoding = match &args.encoding {
        None => None,
        Some(e) => Some(TextEncoding::parse(e).with_context(|| {
            format!("unknown --encoding '{e}': use utf-8, windows-1252 or latin-1")
        })?),
    };
    let opts = IngestOptions {
        table: args.table.clone(),
        key: args
            .key
            .iter()
            .map(|k| k.trim().to_string())
            .filter(|k| !k.is_empty())
            .collect(),
        delimiter: args.delimiter.as_deref().map(parse_delimiter).transpose()?,
        encoding,
    };
    let started = std::time::Instant::now();
    let ctx = id.context(super::now()?);
    let (done, outcome) = history::ingest(
        &mut store,
        &args.file,
        &opts,
        args.message.as_deref().unwrap_or(""),
        &ctx,
    )
    .with_context(|| format!("ingesting {}", args.file.display()))?;
    let secs = started.elapsed().as_secs_f64();
    let r = &outcome.record;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} {} as commit {} {}",
        paint(GOOD, "ingested"),
        paint(BOLD, &r.file_name),
        done.seq,
        paint(DIM, done.id.short())
    )?;
    writeln!(
        o,
        "  table {}: {} rows × {} columns, key {}",
        paint(BOLD, &r.table),
        r.n_rows,
        r.header.len(),
        if r.key.is_empty() {
            "none (rows named by position)".to_string()
        } else {
            r.key.join(", ")
        }
    )?;
    writeln!(
        o,
        "  extract {} ({} bytes; {} new compressed bytes stored) in {:.2} s",
        r.extract.short(),
        r.n_bytes,
        outcome.new_bytes,
        secs
    )?;
    if outcome.blank_lines > 0 {
        writeln!(
            o,
            "  skipped {} blank lines (kept in the raw bytes)",
            outcome.blank_lines
        )?;
    }
    Ok(0)
}

pub fn status(json: bool) -> Result<i32> {
    let store = super::open_store()?;
    let reader = store.read();
    let pending = reader.pending()?;
    let head = reader.head()?;
    if json {
        let list: Vec<serde_json::Value> = pending
            .iter()
            .map(|p| {
                let mut f = super::fixes::fix_json(&p.fix, Some(&p.added_at));
                f.as_object_mut()
                    .expect("object")
                    .insert("note".into(), p.note.clone().into());
                f
            })
            .collect();
        out::json(&serde_json::json!({
            "head": head.map(|(s, id)| serde_json::json!({"seq": s, "id": id.to_hex()})),
            "pending": list,
        }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    match head {
        Some((s, id)) => writeln!(o, "at commit {s} {}", paint(DIM, id.short()))?,
        None => writeln!(o, "no commits yet")?,
    }
    if pending.is_empty() {
        writeln!(o, "no pending fixes")?;
        return Ok(0);
    }
    writeln!(
        o,
        "{} pending fixes (commit with 'emend commit -m \"...\"', drop with 'emend discard'):",
        pending.len()
    )?;
    for p in &pending {
        super::fixes::print_fix(&mut o, &p.fix, "  ")?;
        if let Some(note) = &p.note {
            writeln!(o, "    {}", paint(DIM, note))?;
        }
    }
    Ok(0)
}

#[derive(Args, Debug)]
pub struct CarryArgs {
    /// Table with a new extract
    table: String,
    /// Carry the fixes made up to this revision (default: the last commit before the newest
    /// extract)
    #[arg(long, value_name = "REV")]
    from: Option<String>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

pub fn carry(a: CarryArgs) -> Result<i32> {
    use emend::history::carry::Outcome;
    let mut store = super::open_store()?;
    let now = super::now()?;
    let list = history::carry::carry(&mut store, &a.table, a.from.as_deref(), &now)?;
    if a.json {
        let items: Vec<serde_json::Value> = list
            .iter()
            .map(|c| {
                let mut f = super::fixes::fix_json(&c.fix, None);
                let obj = f.as_object_mut().expect("object");
                obj.insert("outcome".into(), c.outcome.label().into());
                obj.insert("matches_now".into(), c.matches_now.into());
                obj.insert("new_matches".into(), c.new_matches.into());
                obj.insert(
                    "cells".into(),
                    c.cells
                        .iter()
                        .map(|x| serde_json::json!({"row": x.row.to_string(), "column": x.column, "was": x.was, "fixed": x.fixed, "now": x.now, "outcome": x.outcome.label()}))
                        .collect::<Vec<_>>()
                        .into(),
                );
                f
            })
            .collect();
        out::json(&serde_json::json!({"table": a.table, "fixes": items}))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    let staged = list
        .iter()
        .filter(|c| c.outcome == Outcome::Applied)
        .count();
    writeln!(
        o,
        "{} {staged} of {} fixes onto the newest extract of {} (pending; review with 'emend status', then 'emend commit -m ...')",
        paint(GOOD, "carried"),
        list.len(),
        paint(BOLD, &a.table)
    )?;
    for c in &list {
        let style = match c.outcome {
            Outcome::Applied => GOOD,
            Outcome::FixedAtSource => DIM,
            _ => BAD,
        };
        writeln!(
            o,
            "  {} {} — {}",
            paint(style, format!("[{}]", c.outcome.label())),
            c.fix.action.describe(),
            c.fix.why
        )?;
        writeln!(o, "      {}", paint(DIM, c.note()))?;
        for x in c
            .cells
            .iter()
            .filter(|x| x.outcome == Outcome::Conflict)
            .take(20)
        {
            writeln!(
                o,
                "      conflict: row {} {}: the fix changed {} to {}, the new extract holds {}",
                x.row,
                x.column,
                out::cell(&x.was),
                out::cell(&x.fixed),
                out::cell(&x.now)
            )?;
        }
    }
    Ok(0)
}

pub fn discard() -> Result<i32> {
    let mut store = super::open_store()?;
    let n = history::discard(&mut store)?;
    writeln!(out::stdout(), "dropped {n} pending fixes")?;
    Ok(0)
}

pub fn commit(args: CommitArgs) -> Result<i32> {
    let mut store = super::open_store()?;
    let id = identity::load()?;
    let ctx = id.context(super::now()?);
    let done = history::commit_pending(&mut store, &args.message, &ctx)?;
    let mut o = out::stdout();
    let Change::Fixes(records) = &done.body.change else {
        unreachable!("commit_pending records fixes");
    };
    let cells: usize = records.iter().map(|r| r.edits.len()).sum();
    writeln!(
        o,
        "{} commit {} {}: {} fixes, {} cells changed",
        paint(GOOD, "signed"),
        done.seq,
        paint(DIM, done.id.short()),
        records.len(),
        cells
    )?;
    for r in records {
        let n = r.edits.len();
        let count = match r.fix.action {
            emend::model::FixAction::Exclude { .. } | emend::model::FixAction::Distrust { .. } => {
                String::new()
            }
            _ if n == 0 => paint(BAD, " (changed no cell)"),
            _ => format!(" ({n} cells)"),
        };
        writeln!(o, "  {}: {}{count}", r.fix.table, r.fix.action.describe())?;
    }
    Ok(0)
}
