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
    /// Record every open carried conflict as deferred (a signed note on its cells, listed by
    /// the report) instead of refusing to commit
    #[arg(long)]
    defer_conflicts: bool,
}

#[derive(Args, Debug)]
#[command(group(clap::ArgGroup::new("answer").required(true).args(["apply", "keep_source", "set", "missing", "defer"])))]
pub struct ResolveArgs {
    /// The open conflict, numbered as 'emend status' lists them
    number: usize,
    /// Apply the carried fix anyway, to the value the new extract holds
    #[arg(long)]
    apply: bool,
    /// Keep the new extract's value (a signed 'keep' of the cells)
    #[arg(long)]
    keep_source: bool,
    /// Set the cells to this value instead
    #[arg(long, value_name = "VALUE")]
    set: Option<String>,
    /// Set the cells to missing instead
    #[arg(long)]
    missing: bool,
    /// Decide later: a signed note on the cells, listed by the report
    #[arg(long)]
    defer: bool,
    /// Why (required, recorded in the signed commit)
    #[arg(long, value_name = "REASON")]
    why: String,
    /// With --set: a rule of the rules in force the value breaks on purpose
    #[arg(long, value_name = "RULE", requires = "set")]
    despite: Option<String>,
}

pub fn resolve(cx: &CliContext, a: ResolveArgs) -> Result<i32> {
    use emend::ledger::carry::Resolution;
    let how = if a.apply {
        Resolution::Apply
    } else if a.keep_source {
        Resolution::KeepSource
    } else if a.missing {
        Resolution::Set(None)
    } else if let Some(v) = a.set {
        Resolution::Set(Some(v))
    } else {
        Resolution::Defer
    };
    let mut store = cx.store()?;
    let now = cx.now()?;
    let fix = ledger::carry::resolve_conflict(
        &mut store,
        a.number,
        how,
        &a.why,
        &now,
        cx.recorder()?.as_ref(),
        a.despite.as_deref(),
    )?;
    writeln!(
        out::stdout(),
        "{} conflict {} with: {} (pending; 'emend commit -m ...' signs it; 'emend discard N' of it opens the conflict again)",
        paint(GOOD, "answered"),
        a.number,
        fix.action.describe()
    )?;
    Ok(0)
}

/// One open conflict for `status` and `why`.
fn conflict_lines(c: &emend::model::Conflict) -> Vec<String> {
    let from = c
        .fix
        .origins
        .last()
        .map(|o| format!(" (from commit {})", o.seq))
        .unwrap_or_default();
    let mut lines = vec![format!("{}{from} — {}", c.fix.action.describe(), c.fix.why)];
    for x in c.cells.iter().take(20) {
        lines.push(format!(
            "row {} {}: the fix changed {} to {}; the new extract holds {}",
            x.row,
            x.column,
            out::quoted(&x.was),
            out::quoted(&x.fixed),
            out::quoted(&x.now)
        ));
    }
    if c.cells.len() > 20 {
        lines.push(format!("… and {} more cells", c.cells.len() - 20));
    }
    lines
}

pub fn status(cx: &CliContext, json: bool) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let pending = reader.pending()?;
    let conflicts = reader.conflicts()?;
    let head = reader.head()?;
    let me = cx.recorder()?;
    if json {
        let list: Vec<serde_json::Value> = pending
            .iter()
            .map(|p| {
                let mut f = super::fixes::fix_json(&p.fix, Some(&p.added_at));
                let obj = f.as_object_mut().expect("object");
                obj.insert("note".into(), p.note.clone().into());
                obj.insert(
                    "recorded_by".into(),
                    p.by.as_ref().map(|b| serde_json::json!({"name": b.name, "fingerprint": emend::signing::fingerprint(&b.key)})).into(),
                );
                f
            })
            .collect();
        let open: Vec<serde_json::Value> = conflicts
            .iter()
            .map(|c| {
                serde_json::json!({
                    "number": c.id,
                    "fix": super::fixes::fix_json(&c.conflict.fix, None),
                    "cells": c.conflict.cells.iter().map(|x| serde_json::json!({"row": x.row.to_string(), "column": x.column, "was": x.was, "fixed": x.fixed, "now": x.now})).collect::<Vec<_>>(),
                })
            })
            .collect();
        out::json(&serde_json::json!({
            "head": head.map(|(s, id)| serde_json::json!({"seq": s, "id": id.to_hex()})),
            "pending": list,
            "conflicts": open,
        }))?;
        return Ok(0);
    }
    let q = emend::model::quantity;
    let mut o = out::stdout();
    match head {
        Some((s, id)) => writeln!(o, "latest commit {s} {}", paint(DIM, id.short()))?,
        None => writeln!(o, "no commits yet")?,
    }
    if pending.is_empty() && conflicts.is_empty() {
        writeln!(o, "no pending fixes")?;
        writeln!(
            o,
            "{} record one (emend set, recode, missing, exclude, keep, note, ...) or read 'emend profile TABLE'",
            paint(DIM, "next:")
        )?;
        return Ok(0);
    }
    if !pending.is_empty() {
        writeln!(
            o,
            "{}:",
            q(pending.len() as u64, "pending fix", "pending fixes")
        )?;
    }
    let mut others = 0;
    for (i, p) in pending.iter().enumerate() {
        write!(o, "  {}. ", i + 1)?;
        super::fixes::print_fix(&mut o, &p.fix, "  ")?;
        if let Some(b) = &p.by {
            let mine = me.as_ref().is_some_and(|m| m.key == b.key);
            if !mine {
                others += 1;
            }
            writeln!(
                o,
                "    recorded by {}{}",
                out::clean(&b.name),
                if mine { " (you)" } else { "" }
            )?;
        }
        if let Some(note) = &p.note {
            writeln!(o, "    {}", paint(DIM, out::clean(note)))?;
        }
    }
    if !conflicts.is_empty() {
        writeln!(
            o,
            "{} (carried fixes whose cells changed at source; each needs a decision):",
            paint(
                BAD,
                q(conflicts.len() as u64, "open conflict", "open conflicts")
            )
        )?;
        for c in &conflicts {
            let lines = conflict_lines(&c.conflict);
            writeln!(o, "  conflict {}. {}", c.id, out::clean(&lines[0]))?;
            for l in &lines[1..] {
                writeln!(o, "    {}", out::clean(l))?;
            }
        }
    }
    let next = if !conflicts.is_empty() {
        "answer each conflict with 'emend resolve N --apply | --keep-source | --set VALUE | --missing | --defer --why \"...\"', then 'emend commit -m \"...\"' (or commit with --defer-conflicts)".to_string()
    } else if others > 0 {
        "'emend commit -m \"...\"' signs the fixes you recorded; the others stay pending for the person who recorded them".to_string()
    } else {
        "'emend commit -m \"...\"' signs them; 'emend discard N' drops one, 'emend discard' all"
            .to_string()
    };
    writeln!(o, "{} {next}", paint(DIM, "next:"))?;
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
    let list = ledger::carry::carry(
        &mut store,
        &a.table,
        a.from.as_deref(),
        &now,
        cx.recorder()?.as_ref(),
    )?;
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
    let count = |o: Outcome| list.iter().filter(|c| c.outcome == o).count();
    let staged = count(Outcome::Applied);
    let conflicts = count(Outcome::Conflict);
    let before = list
        .iter()
        .filter(|c| matches!(c.outcome, Outcome::AlreadyCarried(_)))
        .count();
    if before > 0 && staged == 0 && conflicts == 0 {
        let commits: std::collections::BTreeSet<String> = list
            .iter()
            .filter_map(|c| match c.outcome {
                Outcome::AlreadyCarried(Some(s)) => Some(format!("commit {s}")),
                Outcome::AlreadyCarried(None) => Some("the open conflicts".to_string()),
                _ => None,
            })
            .collect();
        writeln!(
            o,
            "nothing to carry: {} of the previous extract of {} carried onto the newest already ({}), the rest need nothing here; nothing changed",
            emend::model::quantity(before as u64, "fix was", "fixes were"),
            paint(BOLD, &a.table),
            commits.into_iter().collect::<Vec<_>>().join(", ")
        )?;
        return Ok(0);
    }
    writeln!(
        o,
        "{} {staged} of {} onto the newest extract of {}{}",
        paint(GOOD, "carried"),
        emend::model::quantity(list.len() as u64, "fix", "fixes"),
        paint(BOLD, &a.table),
        if before > 0 {
            format!(" ({before} carried before, left as they are)")
        } else {
            String::new()
        }
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
                out::quoted(&x.was),
                out::quoted(&x.fixed),
                out::quoted(&x.now)
            )?;
        }
    }
    let next = if conflicts > 0 {
        format!(
            "{} open, not applied: 'emend status' lists them, 'emend resolve N ...' answers each; then 'emend commit -m \"...\"'",
            emend::model::quantity(conflicts as u64, "conflict is", "conflicts are")
        )
    } else {
        "review with 'emend status', then 'emend commit -m \"...\"'".to_string()
    };
    writeln!(o, "{} {next}", paint(DIM, "next:"))?;
    Ok(0)
}

#[derive(clap::Args, Debug)]
pub struct DiscardArgs {
    /// The pending fix to drop, numbered as 'emend status' lists them (leave out to drop all)
    number: Option<usize>,
}

pub fn discard(cx: &CliContext, a: DiscardArgs) -> Result<i32> {
    let mut store = cx.store()?;
    let me = cx.recorder()?.map(|r| r.key);
    match a.number {
        Some(n) => {
            let fix = ledger::discard_one(&mut store, n, me.as_ref())?;
            writeln!(
                out::stdout(),
                "dropped pending fix {n}: {}",
                fix.action.describe()
            )?;
        }
        None => {
            let (n, left) = ledger::discard(&mut store, me.as_ref())?;
            let q = emend::model::quantity;
            writeln!(
                out::stdout(),
                "dropped {}{}",
                q(n as u64, "pending fix", "pending fixes"),
                if left > 0 {
                    format!(
                        "; left {} another person recorded (theirs to commit or drop)",
                        q(left as u64, "fix", "fixes")
                    )
                } else {
                    String::new()
                }
            )?;
        }
    }
    Ok(0)
}

pub fn commit(cx: &CliContext, args: CommitArgs) -> Result<i32> {
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let done = ledger::fixes::commit_pending_deferring(
        &mut store,
        &args.message,
        &ctx,
        args.defer_conflicts,
    )?;
    let mut o = out::stdout();
    let Change::Fixes(records) = &done.body.change else {
        unreachable!("commit_pending records fixes");
    };
    let cells = emend::model::net_cells(records);
    writeln!(
        o,
        "{} commit {} {}: {}, {} changed",
        paint(GOOD, "signed"),
        done.seq,
        paint(DIM, done.id.short()),
        emend::model::quantity(records.len() as u64, "fix", "fixes"),
        emend::model::quantity(cells, "cell", "cells")
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
    let left = store.read().pending()?.len();
    if left > 0 {
        writeln!(
            o,
            "left pending: {} another person recorded (they commit their own)",
            emend::model::quantity(left as u64, "fix", "fixes")
        )?;
    }
    if let Some(note) =
        super::id::untrusted_note(&store.read(), &done.body.author.key, &id.name, done.seq)?
    {
        writeln!(o, "{note}")?;
    }
    Ok(0)
}
