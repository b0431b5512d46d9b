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
    /// [REV] NAME: the commit to name (default latest), then the tag's name (a letter first;
    /// letters, digits, '_', '-', '.')
    #[arg(num_args = 1..=2, required = true, value_names = ["REV", "NAME"])]
    args: Vec<String>,
    /// What the tag marks ("version sent to the board")
    #[arg(long, value_name = "TEXT")]
    note: Option<String>,
}

pub fn tag_cmd(cx: &CliContext, a: TagArgs) -> Result<i32> {
    let (rev, name) = match a.args.as_slice() {
        [rev, name] => (rev.as_str(), name.clone()),
        [name] => ("latest", name.clone()),
        _ => anyhow::bail!("tag takes [REV] NAME"),
    };
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let done = ledger::tag(
        &mut store,
        &name,
        rev,
        a.note.as_deref().unwrap_or(""),
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
        paint(BOLD, &name),
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
    let store = cx.store_read()?;
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
        writeln!(o, "no tags yet: emend tag [REV] NAME --note \"...\"")?;
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
