//! `receipt`: a signed receipt of the store's head, to keep outside the store; and the file
//! each new head's receipt is added to automatically, when the user names one.

use super::context::CliContext;
use super::out;
use anyhow::{Context, Result};
use clap::Args;
use emend::query::receipt;
use emend::store::Store;
use std::io::Write;
use std::path::{Path, PathBuf};

#[derive(Args, Debug)]
pub struct ReceiptArgs {
    /// Write the receipt to this file instead of standard output
    #[arg(
        short = 'o',
        long = "output",
        value_name = "FILE",
        conflicts_with = "append"
    )]
    output: Option<PathBuf>,
    /// Add the receipt to the end of this file (a file of receipts, newest last)
    #[arg(long, value_name = "FILE")]
    append: Option<PathBuf>,
    /// From now on, add a receipt to FILE after every command that adds a commit, for this
    /// identity ('none' stops it). Kept with your identity, outside the store; EMEND_RECEIPTS
    /// names such a file for one run
    #[arg(long, value_name = "FILE|none")]
    keep_in: Option<String>,
}

/// Where the file of automatic receipts is named, beside the identity.
fn setting(cx: &CliContext) -> Result<PathBuf> {
    Ok(cx.home()?.join("receipt-file"))
}

/// The file every new head's receipt is added to: `EMEND_RECEIPTS`, else the one named with
/// `receipt --keep-in`, else none.
pub fn kept_in(cx: &CliContext) -> Result<Option<PathBuf>> {
    if let Some(p) = std::env::var_os("EMEND_RECEIPTS").filter(|p| !p.is_empty()) {
        return Ok(Some(PathBuf::from(p)));
    }
    match std::fs::read_to_string(setting(cx)?) {
        Ok(text) => {
            Ok(Some(PathBuf::from(text.trim_end_matches('\n')))
                .filter(|p| !p.as_os_str().is_empty()))
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        Err(e) => Err(e).context("reading the name of your receipt file"),
    }
}

fn append_to(path: &Path, text: &str) -> Result<()> {
    let mut f = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .with_context(|| format!("opening {} to add a receipt", path.display()))?;
    f.write_all(text.as_bytes())
        .and_then(|()| f.sync_all())
        .with_context(|| format!("adding a receipt to {}", path.display()))?;
    Ok(())
}

/// A receipt of the head, signed by `id` (`Name <email>`).
pub fn signed_by(
    cx: &CliContext,
    reader: &emend::store::Reader<'_>,
    id: &super::id::Identity,
) -> Result<receipt::Receipt> {
    let name = match &id.email {
        Some(e) => format!("{} <{e}>", id.name),
        None => id.name.clone(),
    };
    Ok(receipt::make(reader, &id.signer, &name, &cx.now()?)?)
}

fn make(cx: &CliContext, store: &Store) -> Result<receipt::Receipt> {
    signed_by(cx, &store.read(), &cx.identity()?)
}

pub fn receipt_cmd(cx: &CliContext, a: ReceiptArgs) -> Result<i32> {
    if let Some(target) = &a.keep_in {
        let file = setting(cx)?;
        if target == "none" {
            match std::fs::remove_file(&file) {
                Ok(()) => {}
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
                Err(e) => return Err(e).context("forgetting the receipt file"),
            }
            writeln!(out::stdout(), "receipts are no longer added automatically")?;
            return Ok(0);
        }
        let path = std::path::absolute(target).with_context(|| format!("naming {target}"))?;
        std::fs::create_dir_all(cx.home()?)?;
        std::fs::write(&file, format!("{}\n", path.display()))
            .with_context(|| format!("writing {}", file.display()))?;
        // The first receipt goes in now, so the file is never empty and its name is checked.
        let store = cx.store_read()?;
        let r = make(cx, &store)?;
        append_to(&path, &r.text())?;
        writeln!(
            out::stdout(),
            "after every command that adds a commit, a receipt of the store's head is added to {} (first one added: commit {}); 'emend receipt --keep-in none' stops it",
            out::clean(&path.display().to_string()),
            r.seq
        )?;
        return Ok(0);
    }
    let store = cx.store_read()?;
    let r = make(cx, &store)?;
    match (&a.output, &a.append) {
        (Some(path), _) => {
            std::fs::write(path, r.text())
                .with_context(|| format!("writing {}", path.display()))?;
            eprintln!(
                "wrote a receipt of commit {} ({}) to {}; keep it outside the store, and check with 'emend verify --receipt {}'",
                r.seq,
                r.id.short(),
                path.display(),
                path.display()
            );
        }
        (None, Some(path)) => {
            append_to(path, &r.text())?;
            eprintln!(
                "added a receipt of commit {} ({}) to {}",
                r.seq,
                r.id.short(),
                path.display()
            );
        }
        (None, None) => {
            out::stdout().write_all(r.text().as_bytes())?;
        }
    }
    Ok(0)
}

/// After a command: when the head moved and a receipt file is named, add a receipt of the new
/// head. A failure here is said, not fatal: the commit itself has landed.
pub fn after_command(cx: &CliContext, before: Option<(u64, emend::hash::CommitId)>) {
    let Ok(Some(path)) = kept_in(cx) else {
        return;
    };
    let result = (|| -> Result<Option<u64>> {
        let store = cx.store_read_unchecked()?;
        let head = store.read().head()?;
        if head.is_none() || head == before {
            return Ok(None);
        }
        let r = make(cx, &store)?;
        append_to(&path, &r.text())?;
        Ok(Some(r.seq))
    })();
    match result {
        Ok(Some(seq)) => eprintln!(
            "receipt of commit {seq} added to {}",
            out::clean(&path.display().to_string())
        ),
        Ok(None) => {}
        Err(e) => eprintln!(
            "warning: no receipt was added to {}: {e:#}",
            out::clean(&path.display().to_string())
        ),
    }
}

/// The head before a command, when receipts are kept automatically.
pub fn head_before(cx: &CliContext) -> Option<(u64, emend::hash::CommitId)> {
    if !matches!(kept_in(cx), Ok(Some(_))) {
        return None;
    }
    cx.store_read_unchecked().ok()?.read().head().ok().flatten()
}
