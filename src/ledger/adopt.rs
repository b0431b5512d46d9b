//! Adopting a rules file: a signed commit with a reason, after the file parses and names only
//! columns the table has. Reading the rules in force is [`crate::query::rules_at`]; checking a
//! version is [`crate::views::check_version`].

use super::fixes::{Attachments, store_bytes, store_file};
use super::seal::{CommitContext, CommitOutcome, seal};
use crate::checks::{Checker, RuleSet};
use crate::error::{Error, Result};
use crate::ingest::{Input, InputOptions};
use crate::model::{Change, Evidence, Fix, FixAction, FixRecord};
use crate::query::Version;
use crate::store::Store;
use std::path::{Path, PathBuf};

/// Parse a rules file and check it names only columns of `header`; errors name the file,
/// line and key.
pub fn parse_for(path: &Path, text: &str, header: &[String]) -> Result<RuleSet> {
    let bad = |error| Error::BadRules {
        path: path.to_path_buf(),
        error,
    };
    let rules = RuleSet::parse(text).map_err(bad)?;
    Checker::new(&rules, header).map_err(bad)?;
    Ok(rules)
}

/// Read a rules file as UTF-8 text, through one handle: a regular file or a pipe no larger
/// than `opts.max_bytes`.
pub fn read_text(path: &Path, opts: &InputOptions) -> Result<String> {
    text_of(&Input::open(path, opts)?)
}

fn text_of(input: &Input) -> Result<String> {
    input.rewind()?;
    let bytes = input.read_all()?;
    String::from_utf8(bytes).map_err(|e| Error::NotText {
        path: input.path().to_path_buf(),
        offset: e.utf8_error().valid_up_to(),
    })
}

/// Adopt a rules file for a table: one signed commit. Nothing is committed when the file does
/// not parse or names a column the table lacks. The rules file and the evidence are opened
/// (with `limits`) before the write lock is taken, and the bytes stored are the bytes parsed.
#[allow(clippy::too_many_arguments)]
pub fn adopt(
    store: &mut Store,
    table: &str,
    path: &Path,
    why: &str,
    evidence: &[PathBuf],
    consulted: Option<String>,
    ctx: &CommitContext<'_>,
    limits: &InputOptions,
) -> Result<CommitOutcome> {
    if why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    let rules = PathBuf::from(path);
    let files = Attachments::open(store, std::iter::once(&rules).chain(evidence), limits)?;
    let text = text_of(files.get(path)?)?;
    let tx = store.transaction()?;
    let reader = tx.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let version = Version::load(&reader, table, head, false)?;
    parse_for(path, &text, version.header())?;
    let (blob, n_bytes) = store_bytes(&tx, path, text.as_bytes())?;
    let mut ev = Vec::new();
    for p in evidence {
        let (b, n) = store_file(&tx, files.get(p)?)?;
        ev.push(Evidence {
            name: file_name(p),
            blob: b,
            n_bytes: n,
        });
    }
    let fix = Fix {
        table: table.to_string(),
        action: FixAction::Rules {
            file_name: file_name(path),
            blob,
            n_bytes,
        },
        why: why.trim().to_string(),
        evidence: ev,
        consulted: consulted.filter(|c| !c.trim().is_empty()),
        origins: Vec::new(),
    };
    let message = format!("rules for {table}: {}", why.trim());
    let change = Change::Fixes(vec![FixRecord {
        fix,
        edits: Vec::new(),
    }]);
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    tx.commit()?;
    Ok(done)
}

fn file_name(p: &Path) -> String {
    p.file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default()
}
