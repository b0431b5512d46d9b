//! The rules file in force for a table at a commit, read back from the commit that adopted it.

use super::commits::decode;
use crate::checks::RuleSet;
use crate::error::{Error, Result};
use crate::hash::{BlobId, Digest};
use crate::model::edit::Rows;
use crate::model::{Change, FixAction};
use crate::store::Reader;
use std::io::Read;

/// The rules in force for `table` at commit `seq`: (the commit that adopted them, file name,
/// text), or `None` when no rules were adopted by then.
pub fn rules_at(
    reader: &Reader<'_>,
    table: &str,
    seq: u64,
) -> Result<Option<(u64, String, String)>> {
    for s in (1..=seq).rev() {
        let Some(stored) = reader.try_commit(s)? else {
            continue;
        };
        if let Change::Fixes(list) = decode(&stored)?.change {
            for r in list.into_iter().rev() {
                if let (
                    true,
                    FixAction::Rules {
                        file_name, blob, ..
                    },
                ) = (r.fix.table == table, r.fix.action)
                {
                    let mut text = String::new();
                    reader
                        .open_blob(&blob)?
                        .read_to_string(&mut text)
                        .map_err(|e| {
                            Error::Corrupt(format!(
                                "rules file {file_name} ({}) does not read: {e}",
                                blob.short()
                            ))
                        })?;
                    return Ok(Some((s, file_name, text)));
                }
            }
        }
    }
    Ok(None)
}

/// The rows rule `rule` of the rules in force for `table` at commit `seq` finds, as a fix
/// stores them: the rule id and the stored rules file.
///
/// # Errors
///
/// No rules adopted for the table by then, or no rule of that id (the error lists the ids).
pub fn breaking_rows(reader: &Reader<'_>, table: &str, seq: u64, rule: &str) -> Result<Rows> {
    let Some((_, name, text)) = rules_at(reader, table, seq)? else {
        return Err(Error::Invalid(format!(
            "no rules adopted for '{table}', so no rule '{rule}' to choose rows by; adopt a file with 'emend rules {table} FILE --why ...'"
        )));
    };
    let set = RuleSet::parse(&text)
        .map_err(|e| Error::Corrupt(format!("stored rules file {name} does not parse: {e}")))?;
    let ids = set.rule_ids();
    if !ids.iter().any(|id| id == rule) {
        return Err(Error::Invalid(format!(
            "the rules in force for '{table}' ({name}) have no rule '{rule}'; they have: {}",
            ids.join(", ")
        )));
    }
    Ok(Rows::Breaking {
        rule: rule.to_owned(),
        rules: BlobId(Digest::of(text.as_bytes())),
    })
}
