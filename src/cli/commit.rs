//! The pending fixes: `status`, `discard`, `carry` (replay fixes onto a new extract) and
//! `commit` (sign them).

use super::out::{self, BAD, BOLD, DIM, GOOD, paint};
use anyhow::Result;
use clap::Args;
use emend::ledger;
use emend::model::Change;
use std::io::Write;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct CommitArgs {
    /// What this set of fixes does
    #[arg(long, short = 'm')]
    message: String,
}

pub fn status(cx: &CliContext, json: bool) -> Result<i32> {
    let store = cx.store()?;
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
    for (i, p) in pending.iter().enumerate() {
        write!(o, "  {}. ", i + 1)?;
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

pub fn carry(cx: &CliContext, a: CarryArgs) -> Result<i32> {
    use emend::ledger::carry::Outcome;
    let mut store = cx.store()?;
    let now = cx.now()?;
    let list = ledger::carry::carry(&mut store, &a.table, a.from.as_deref(), &now)?;
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

#[derive(clap::Args, Debug)]
pub struct DiscardArgs {
    /// The pending fix to drop, numbered as 'emend status' lists them (leave out to drop all)
    number: Option<usize>,
}

pub fn discard(cx: &CliContext, a: DiscardArgs) -> Result<i32> {
    let mut store = cx.store()?;
    match a.number {
        Some(n) => {
            let fix = ledger::discard_one(&mut store, n)?;
            writeln!(
                out::stdout(),
                "dropped pending fix {n}: {}",
                fix.action.describe()
            )?;
        }
        None => {
            let n = ledger::discard(&mut store)?;
            writeln!(out::stdout(), "dropped {n} pending fixes")?;
        }
    }
    Ok(0)
}

pub fn commit(cx: &CliContext, args: CommitArgs) -> Result<i32> {
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let done = ledger::commit_pending(&mut store, &args.message, &ctx)?;
    let mut o = out::stdout();
    let Change::Fixes(records) = &done.body.change else {
        unreachable!("commit_pending records fixes");
    };
    let cells: usize = records.iter().map(|r| r.edits.len()).sum();
    writeln!(
        o,
        "{} commit {} {}: {}, {} changed",
        paint(GOOD, "signed"),
        done.seq,
        paint(DIM, done.id.short()),
        emend::model::quantity(records.len() as u64, "fix", "fixes"),
        emend::model::quantity(cells as u64, "cell", "cells")
    )?;
    for r in records {
        let n = r.edits.len();
        let count = match out::cells_changed(&r.fix.action, n) {
            None => String::new(),
            Some(_) if n == 0 => paint(BAD, " (changed no cell)"),
            Some(text) => format!(" ({text})"),
        };
        writeln!(o, "  {}: {}{count}", r.fix.table, r.fix.action.describe())?;
    }
    if let Some(note) =
        super::id::untrusted_note(&store.read(), &done.body.author.key, &id.name, done.seq)?
    {
        writeln!(o, "{note}")?;
    }
    Ok(0)
}
