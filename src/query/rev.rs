//! Revisions as users type them (`7`, a tag, 8+ hex digits, `latest`, `raw`), resolved to a
//! commit; the version of a table at one; and row ids as typed.

use super::commits::ingest_record;
use super::version::Version;
use crate::error::{Error, Result};
use crate::model::RowId;
use crate::store::Reader;

/// A revision resolved to a commit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rev {
    /// Commit sequence.
    pub seq: u64,
    /// The raw extract, without fixes.
    pub raw: bool,
}

/// Resolve what a user typed as a revision.
pub fn resolve(reader: &Reader<'_>, text: &str) -> Result<Rev> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let text = text.trim();
    match text {
        "latest" => {
            return Ok(Rev {
                seq: head,
                raw: false,
            });
        }
        "raw" => {
            return Ok(Rev {
                seq: head,
                raw: true,
            });
        }
        _ => {}
    }
    if let Some((_, target)) = reader.try_tag(text)? {
        return Ok(Rev {
            seq: target,
            raw: false,
        });
    }
    if !text.is_empty() && text.len() < 8 && text.bytes().all(|b| b.is_ascii_digit()) {
        let seq: u64 = text
            .parse()
            .map_err(|_| Error::UnknownRevision(text.into()))?;
        if seq == 0 || seq > head {
            return Err(Error::UnknownRevision(text.into()));
        }
        return Ok(Rev { seq, raw: false });
    }
    if text.len() >= 8 && text.len() <= 64 && text.bytes().all(|b| b.is_ascii_hexdigit()) {
        let prefix = text.to_ascii_lowercase();
        let found = reader.commits_with_prefix(&prefix)?;
        return match found.as_slice() {
            [] => Err(Error::UnknownRevision(text.into())),
            [(seq, _)] => Ok(Rev {
                seq: *seq,
                raw: false,
            }),
            many => Err(Error::AmbiguousRevision {
                prefix: text.into(),
                candidates: many
                    .iter()
                    .map(|(s, id)| format!("{s} ({})", id.short()))
                    .collect(),
            }),
        };
    }
    Err(Error::UnknownRevision(text.into()))
}

/// The version of `table` at a resolved revision.
pub fn version_at(reader: &Reader<'_>, table: &str, rev: Rev) -> Result<Version> {
    Version::load(reader, table, rev.seq, rev.raw)
}

/// A row id as the user typed it, for a table.
pub fn parse_row(reader: &Reader<'_>, table: &str, text: &str) -> Result<RowId> {
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let (seq, _) = reader
        .extract_at(table, head)?
        .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
    let def = ingest_record(reader, seq)?;
    Ok(RowId::parse_user(text, def.key.len()))
}
