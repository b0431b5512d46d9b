//! Tags: a signed name for a commit that never moves.

use super::seal::{CommitContext, CommitOutcome, seal};
use crate::error::{Error, Result};
use crate::model::Change;
use crate::query::resolve;
use crate::store::Store;

/// Check a tag name: a letter first, then letters, digits, `_`, `-` or `.`; not a word or a
/// form that a revision already means.
pub fn check_tag_name(name: &str) -> Result<()> {
    let shape = !name.is_empty()
        && name.len() <= 64
        && name.chars().next().is_some_and(|c| c.is_ascii_alphabetic())
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'));
    let reserved = matches!(name, "latest" | "raw")
        || (name.len() >= 8 && name.bytes().all(|b| b.is_ascii_hexdigit()));
    if shape && !reserved {
        Ok(())
    } else {
        Err(Error::Invalid(format!(
            "tag name '{name}' is not allowed: start with a letter, use letters, digits, '_', '-' or '.', and avoid 'latest', 'raw' and names made only of 8 or more hex digits"
        )))
    }
}

/// Name a commit with a signed tag. Tags never move: a name is used once.
pub fn tag(
    store: &mut Store,
    name: &str,
    rev: &str,
    message: &str,
    ctx: &CommitContext<'_>,
) -> Result<CommitOutcome> {
    check_tag_name(name)?;
    let tx = store.transaction()?;
    let reader = tx.read();
    if let Some((seq, target)) = reader.try_tag(name)? {
        return Err(Error::TagTaken {
            name: name.to_string(),
            target,
            seq,
        });
    }
    let resolved = resolve(&reader, rev)?;
    if resolved.raw {
        return Err(Error::Invalid(
            "'raw' is not a commit; tag the ingest commit by its number instead".into(),
        ));
    }
    let target = reader
        .try_commit(resolved.seq)?
        .ok_or_else(|| Error::UnknownRevision(rev.to_string()))?;
    let message = if message.trim().is_empty() {
        format!("tag {name}")
    } else {
        message.trim().to_string()
    };
    let change = Change::Tag(crate::model::TagRecord {
        name: name.to_string(),
        target: target.id,
        target_seq: target.seq,
    });
    let done = seal(&tx, ctx, &message, change, Vec::new())?;
    tx.commit()?;
    Ok(done)
}
