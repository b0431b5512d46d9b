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
    /// Check receipts kept outside the store (made by 'emend receipt'): the store must still
    /// hold each receipted commit at its number, and its history must extend it
    #[arg(long, value_name = "FILE", num_args = 1..)]
    receipt: Vec<PathBuf>,
    /// Check a team store on its server instead of this folder's store (read only: an
    /// auditor's role is enough); its published receipts are checked too
    #[cfg(feature = "team")]
    #[arg(long, value_name = "ADDRESS")]
    team: Option<String>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

/// One receipt's check, for printing.
struct ReceiptLine {
    file: String,
    line: usize,
    seq: Option<u64>,
    ok: bool,
    what: String,
}

/// Check every receipt in `files`; what is wrong goes into the report's problems.
fn check_receipts(
    reader: &emend::store::Reader<'_>,
    files: &[PathBuf],
    extra: Vec<(String, String)>,
    report: &mut emend::query::VerifyReport,
) -> Result<Vec<ReceiptLine>> {
    use emend::query::receipt::{Standing, check, parse_all};
    let mut lines = Vec::new();
    let mut sources = Vec::new();
    for file in files {
        let text = std::fs::read_to_string(file)
            .with_context(|| format!("reading the receipts in {}", file.display()))?;
        sources.push((file.display().to_string(), text));
    }
    sources.extend(extra);
    for (name, text) in sources {
        let parsed = parse_all(&text);
        if parsed.is_empty() {
            bail!(
                "{name} holds no receipt (a receipt starts with the line '{}')",
                emend::query::receipt::RECEIPT_HEADER
            );
        }
        for (line, r) in parsed {
            let (seq, ok, what) = match r {
                Err(why) => (None, false, format!("not a receipt: it {why}")),
                Ok(r) => {
                    let at = format!("commit {} ({})", r.seq, r.id.short());
                    match check(reader, &r)? {
                        Standing::Holds { head } => (
                            Some(r.seq),
                            true,
                            if head == r.seq {
                                format!("{at} is the store's head, as receipted by {} at {}", r.signer_name, r.made_at)
                            } else {
                                format!("{at} is held; the history extends it to commit {head} (receipted by {} at {})", r.signer_name, r.made_at)
                            },
                        ),
                        Standing::Cut { head } => (
                            Some(r.seq),
                            false,
                            format!(
                                "HISTORY CUT: the receipt of {} at {} names {at}, but the store ends at commit {head}: {} gone, or the store was replaced by an older copy",
                                r.signer_name,
                                r.made_at,
                                if r.seq == head + 1 {
                                    format!("commit {} is", r.seq)
                                } else {
                                    format!("commits {} to {} are", head + 1, r.seq)
                                }
                            ),
                        ),
                        Standing::Rewritten { found } => (
                            Some(r.seq),
                            false,
                            format!(
                                "HISTORY REWRITTEN: the receipt names {at}, the store holds {} at that number: history was replaced from commit {} or before",
                                found.short(),
                                r.seq
                            ),
                        ),
                        Standing::OtherHistory { found } => (
                            Some(r.seq),
                            false,
                            format!(
                                "the receipt is of another history (its commit 1 is {}, this store's is {})",
                                r.history.short(),
                                found.map(|f| f.short()).unwrap_or_else(|| "none".into())
                            ),
                        ),
                        Standing::BadSignature => (
                            Some(r.seq),
                            false,
                            "the receipt's signature does not verify: the receipt itself was altered".into(),
                        ),
                    }
                }
            };
            if !ok {
                report.problems.push(emend::query::verify::Problem {
                    object: format!("receipt at {name}:{line}"),
                    what: what.clone(),
                });
            }
            lines.push(ReceiptLine {
                file: name.clone(),
                line,
                seq,
                ok,
                what,
            });
        }
    }
    Ok(lines)
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
    // A store holding schema objects emend never made is refused by every other command;
    // verify opens it for reading only, runs nothing in it, and lists them with the rest.
    // A team store is copied (on one snapshot, believing nothing) into a temporary store,
    // which the same checks then read; what only the server can get wrong is added after.
    #[cfg(feature = "team")]
    let audit = match &a.team {
        Some(address) => {
            let dir = tempfile::tempdir().context("making a folder for the audit copy")?;
            let mut server = super::team::connect(address)?;
            let copy = emend::team::audit::copy_for_audit(
                &mut server,
                &dir.path().join("audit.sqlite"),
                &cx.now()?,
            )?;
            if !a.json {
                writeln!(
                    out::stdout(),
                    "team store {}: head commit {}, copied on one snapshot for the audit",
                    out::clean(server.shown()),
                    copy.head
                )?;
            }
            let receipts: Vec<(String, String)> = copy
                .receipts
                .iter()
                .map(|(seq, text, by)| {
                    (
                        format!("team store receipt of commit {seq} published by {by}"),
                        text.clone(),
                    )
                })
                .collect();
            Some((dir, copy.store, copy.problems, receipts))
        }
        None => None,
    };
    #[cfg(not(feature = "team"))]
    let audit: Option<(
        tempfile::TempDir,
        emend::store::Store,
        Vec<emend::query::verify::Problem>,
        Vec<(String, String)>,
    )> = None;
    let (store, team_problems, team_receipts, _audit_dir) = match audit {
        Some((dir, store, problems, receipts)) => (store, problems, receipts, Some(dir)),
        None => (local_store(cx)?, Vec::new(), Vec::new(), None),
    };
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
    // One snapshot, so commits landing meanwhile from another process are not half-seen.
    let mut report = store.snapshot(|r| run_verify(r, &trust, &mut progress))?;
    report.problems.extend(team_problems);
    let receipts = check_receipts(&store.read(), &a.receipt, team_receipts, &mut report)?;
    print_report(a, report, receipts, show_progress)
}

/// This folder's store, opened read only without the read check (verify is the check).
fn local_store(cx: &CliContext) -> Result<emend::store::Store> {
    Ok(match cx.store_read_unchecked() {
        Err(e) => match e.downcast_ref::<emend::Error>() {
            Some(emend::Error::ForeignSchema { path, .. }) => {
                emend::store::Store::open_for_audit(path)?
            }
            _ => return Err(e),
        },
        Ok(s) => s,
    })
}

fn print_report(
    a: VerifyArgs,
    report: emend::query::VerifyReport,
    receipts: Vec<ReceiptLine>,
    show_progress: bool,
) -> Result<i32> {
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
            "receipts": receipts.iter().map(|r| serde_json::json!({
                "file": r.file, "line": r.line, "commit": r.seq, "holds": r.ok, "says": r.what,
            })).collect::<Vec<_>>(),
            "signers": report.trust_paths.iter().map(|t| serde_json::json!({
                "key": data_encoding::HEXLOWER.encode(&t.key),
                "name": t.name,
                "commits": t.n_signed,
                "trusted": !t.chain.is_empty(),
                "chain": t.chain.iter().map(|s| serde_json::json!({
                    "key": data_encoding::HEXLOWER.encode(&s.key),
                    "name": s.name,
                    "vouched_in_commit": s.by_commit,
                })).collect::<Vec<_>>(),
            })).collect::<Vec<_>>(),
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
        let roots = if a.trust.is_some() {
            "a key in the list given"
        } else {
            "a root of this store"
        };
        for t in &report.trust_paths {
            let fp = emend::signing::fingerprint(&t.key);
            let how = match t.chain.len() {
                0 => "not trusted".to_string(),
                1 => roots.to_string(),
                _ => format!(
                    "trusted through {}",
                    t.chain
                        .iter()
                        .map(|s| match s.by_commit {
                            None => format!("{} ({roots})", out::clean(&s.name)),
                            Some(c) =>
                                format!("{}, vouched for in commit {c}", out::clean(&s.name)),
                        })
                        .collect::<Vec<_>>()
                        .join(" → ")
                ),
            };
            writeln!(
                o,
                "{} {} ({fp}), {}: {how}",
                paint(BOLD, "signer:"),
                out::clean(&t.name),
                q(t.n_signed, "commit", "commits")
            )?;
        }
        for r in receipts.iter().filter(|r| r.ok) {
            writeln!(
                o,
                "{} {}:{}: {}",
                paint(GOOD, "receipt holds:"),
                out::clean(&r.file),
                r.line,
                out::clean(&r.what)
            )?;
        }
        if receipts.is_empty() && report.is_clean() {
            writeln!(
                o,
                "  (a store cut at its end, or replaced by an older copy, still verifies: keep receipts outside it with 'emend receipt' and check them with 'verify --receipt FILE')"
            )?;
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
