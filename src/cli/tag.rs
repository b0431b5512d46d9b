//! `tag` (name a commit in a signed commit) and `tags` (list them).

use super::out::{self, BOLD, DIM, GOOD, paint};
use anyhow::Result;
use clap::Args;
use emend::ledger;
use emend::query::{self};
use emend::signing::fingerprint;
use std::io::Write;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct TagArgs {
    /// Tag name (a letter first; letters, digits, '_', '-', '.')
    name: String,
    /// The commit to name (default latest)
    #[arg(default_value = "latest")]
    rev: String,
    /// What the tag marks
    #[arg(short = 'm', long = "message")]
    message: Option<String>,
}

pub fn tag_cmd(cx: &CliContext, a: TagArgs) -> Result<i32> {
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let done = ledger::tag(
        &mut store,
        &a.name,
        &a.rev,
        a.message.as_deref().unwrap_or(""),
        &ctx,
    )?;
    let target = match &done.body.change {
        emend::model::Change::Tag(t) => t.target_seq,
        _ => unreachable!("tag makes a tag commit"),
    };
    writeln!(
        out::stdout(),
        "{} {} names commit {} (signed as commit {} {})",
        paint(GOOD, "tagged"),
        paint(BOLD, &a.name),
        target,
        done.seq,
        paint(DIM, done.id.short())
    )?;
    if let Some(note) =
        super::id::untrusted_note(&store.read(), &done.body.author.key, &id.name, done.seq)?
    {
        writeln!(out::stdout(), "{note}")?;
    }
    Ok(0)
}

pub fn tags_cmd(cx: &CliContext, json: bool) -> Result<i32> {
    let store = cx.store()?;
    let reader = store.read();
    let mut items = Vec::new();
    for (name, seq, target) in reader.tags()? {
        let stored = reader
            .try_commit(seq)?
            .ok_or_else(|| anyhow::anyhow!("tag commit {seq} is missing"))?;
        let body = query::decode(&stored)?;
        items.push((name, seq, target, body));
    }
    if json {
        out::json(
            &serde_json::json!({"tags": items.iter().map(|(n, s, t, b)| serde_json::json!({
            "name": n, "target_seq": t, "tag_seq": s, "message": b.message, "time": b.time,
            "author": {"name": b.author.name, "fingerprint": fingerprint(&b.author.key)},
        })).collect::<Vec<_>>()}),
        )?;
        return Ok(0);
    }
    let mut o = out::stdout();
    if items.is_empty() {
        writeln!(o, "no tags yet: emend tag NAME [REV] -m \"...\"")?;
    }
    for (n, s, t, b) in &items {
        writeln!(
            o,
            "{}  commit {t}  {}  {}  {} {}",
            paint(BOLD, n),
            b.time,
            b.author.name,
            b.message,
            paint(DIM, format!("(tag commit {s})"))
        )?;
    }
    Ok(0)
}
