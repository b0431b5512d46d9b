//! `verify`: check the whole store and say what, if anything, is wrong. Exit 1 when anything
//! was altered, 3 when nothing was but some commits are signed by untrusted keys.

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
    let store = cx.store_read()?;
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
        let list = |l: &[emend::query::verify::Problem]| {
            l.iter()
                .map(|p| serde_json::json!({"object": p.object, "problem": p.what}))
                .collect::<Vec<_>>()
        };
        out::json(&serde_json::json!({
            "intact": report.is_clean(),
            "trusted": report.is_trusted(),
            "trust": if a.trust.is_some() { "file" } else { "store" },
            "checked": {
                "commits": report.n_commits,
                "chunks": report.n_chunks,
                "files": report.n_files,
                "table_versions": report.n_versions,
                "index_rows": report.n_index_rows,
            },
            "problems": list(&report.problems),
            "untrusted": list(&report.untrusted),
            "warnings": list(&report.warnings),
        }))?;
    } else {
        let mut o = out::stdout();
        let q = emend::model::quantity;
        let counts = format!(
            "{}, {} of stored data, {}, {} and {} of the derived index",
            q(report.n_commits, "commit", "commits"),
            q(report.n_chunks, "piece", "pieces"),
            q(report.n_files, "stored file", "stored files"),
            q(report.n_versions, "table version", "table versions"),
            q(report.n_index_rows, "row", "rows")
        );
        if report.is_clean() {
            writeln!(
                o,
                "{} {counts} checked: every hash, signature, version and index row checks out",
                paint(GOOD, "intact:")
            )?;
        } else {
            writeln!(
                o,
                "{} {} found ({counts} checked)",
                paint(BAD, "NOT INTACT:"),
                q(report.problems.len() as u64, "problem", "problems")
            )?;
            for p in &report.problems {
                writeln!(
                    o,
                    "  {}: {}",
                    paint(BOLD, out::clean(&p.object)),
                    out::clean(&p.what)
                )?;
            }
        }
        if !report.untrusted.is_empty() {
            writeln!(
                o,
                "{} {} signed by keys not trusted at them (each is as its signer signed it, but that signer is not one this store trusts):",
                paint(BAD, "untrusted signers:"),
                q(report.untrusted.len() as u64, "commit is", "commits are")
            )?;
            for p in &report.untrusted {
                writeln!(
                    o,
                    "  {}: {}",
                    paint(BOLD, out::clean(&p.object)),
                    out::clean(&p.what)
                )?;
            }
            let next = if a.trust.is_some() {
                "  next: these commits stay untrusted under this list; an auditor who accepts a signer adds its key (64 hex digits) to the list"
            } else {
                "  next: trust is never given backwards, so these commits stay as they are; for a signer's later commits, a trusted signer runs 'emend trust KEY --name NAME --why REASON' (unless it is trusted already); an auditor who accepts these commits lists the key in 'emend verify --trust KEYS.txt'"
            };
            writeln!(o, "{next}")?;
        }
        for p in &report.warnings {
            writeln!(
                o,
                "{} {}: {}",
                paint(BOLD, "warning:"),
                out::clean(&p.object),
                out::clean(&p.what)
            )?;
        }
    }
    Ok(if !report.is_clean() {
        super::EXIT_FOUND
    } else if !report.is_trusted() {
        super::EXIT_UNTRUSTED
    } else {
        super::EXIT_OK
    })
}
