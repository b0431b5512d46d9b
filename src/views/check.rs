//! Checking a version against a rules file: the version's rows streamed through the pure
//! [`crate::checks::Checker`].

use crate::checks::{CheckReport, Checker, RuleSet};
use crate::error::{Error, Result};
use crate::query::Version;
use crate::store::Reader;
use std::ops::ControlFlow;

/// Check a version against rules, streaming its rows (excluded rows left out).
pub fn check_version(
    reader: &Reader<'_>,
    version: &Version,
    rules: &RuleSet,
) -> Result<CheckReport> {
    let mut checker =
        Checker::new(rules, version.header()).map_err(|e| Error::Invalid(e.to_string()))?;
    version.for_each_row(reader, |row| {
        if !row.excluded {
            let cells: Vec<Option<&str>> = row.cells.iter().map(|c| c.as_deref()).collect();
            checker.push_row(row.pos, &row.id.to_string(), &cells);
        }
        Ok(ControlFlow::Continue(()))
    })?;
    Ok(checker.finish())
}
