//! `verify`: check the whole store and say what, if anything, is wrong. Exit 1 when anything is.

use super::out::{self, BAD, BOLD, GOOD, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::query::verify::{Trust, verify as run_verify};
use std::io::{IsTerminal, Write};
use std::path::PathBuf;

use super::context::CliContext;

#[derive(Args, Debug)]
pub struct VerifyArgs {
    /// Decide trust from this file of public keys (64 hex digits per line, '#' comments)
    /// instead of the store's own list
    #[arg(long, value_name = "FILE")]
    trust: Option<PathBuf>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

fn read_keys(path: &PathBuf) -> Result<Vec<[u8; 32]>> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("reading {}", path.display()))?;
    let mut keys = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let line = line.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let word = line.split_whitespace().next().unwrap_or("");
        let key: [u8; 32] = data_encoding::HEXLOWER_PERMISSIVE
            .decode(word.as_bytes())
            .ok()
            .and_then(|v| v.try_into().ok())
            .with_context(|| {
                format!(
                    "{}:{}: not a public key (64 hex digits)",
                    path.display(),
                    i + 1
                )
            })?;
        keys.push(key);
    }
    if keys.is_empty() {
        bail!("{} lists no public keys", path.display());
    }
    Ok(keys)
}

pub fn verify(cx: &CliContext, a: VerifyArgs) -> Result<i32> {
    let store = cx.store()?;
    let trust = match &a.trust {
        Some(p) => Trust::Keys(read_keys(p)?),
        None => Trust::Store,
    };
    let show_progress = std::io::stderr().is_terminal() && !a.json;
    let mut progress = |stage: &str| {
        if show_progress {
            let _ = write!(anstream::stderr(), "\rverifying {stage}…          ");
        }
    };
    let report = run_verify(&store.read(), &trust, &mut progress)?;
    if show_progress {
        let _ = write!(anstream::stderr(), "\r{}\r", " ".repeat(40));
    }
    if a.json {
        out::json(&serde_json::json!({
            "intact": report.is_clean(),
            "trust": if a.trust.is_some() { "file" } else { "store" },
            "checked": {
                "commits": report.n_commits,
                "chunks": report.n_chunks,
                "files": report.n_files,
                "table_versions": report.n_versions,
                "index_rows": report.n_index_rows,
            },
            "problems": report.problems.iter().map(|p| serde_json::json!({"object": p.object, "problem": p.what})).collect::<Vec<_>>(),
        }))?;
    } else {
        let mut o = out::stdout();
        let counts = format!(
            "{} commits, {} chunks, {} stored files, {} table versions, {} index rows",
            report.n_commits,
            report.n_chunks,
            report.n_files,
            report.n_versions,
            report.n_index_rows
        );
        if report.is_clean() {
            writeln!(
                o,
                "{} {counts}: every hash, signature, version and index row checks out",
                paint(GOOD, "intact:")
            )?;
        } else {
            writeln!(
                o,
                "{} {} problems found ({counts} checked)",
                paint(BAD, "NOT INTACT:"),
                report.problems.len()
            )?;
            for p in &report.problems {
                writeln!(o, "  {}: {}", paint(BOLD, &p.object), p.what)?;
            }
        }
    }
    Ok(if report.is_clean() {
        super::EXIT_OK
    } else {
        super::EXIT_FOUND
    })
}
