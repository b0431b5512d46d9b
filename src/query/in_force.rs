//! The rules file in force for a table at a commit, read back from the commit that adopted it.

use super::commits::decode;
use crate::error::{Error, Result};
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
