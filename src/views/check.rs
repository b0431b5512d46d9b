//! Checking a version against a rules file: the version's rows streamed through the pure
//! [`crate::checks::Checker`], batch by batch on the caller's thread pool.

use crate::checks::{CheckReport, Checker, RuleSet};
use crate::error::{Error, Result};
use crate::model::{RowBatch, RowId};
use crate::progress::Progress;
use crate::query::{RowSink, Version};
use crate::store::Reader;

/// A check as rows stream past (excluded rows left out).
pub(crate) struct CheckSink<'r> {
    pub(crate) checker: Checker<'r>,
}

impl RowSink for CheckSink<'_> {
    fn push_batch(&mut self, batch: &RowBatch) {
        let rows = batch.included();
        let name = |r: usize| RowId(batch.id(r).to_owned()).to_string();
        self.checker.push_batch(batch, &rows, &name);
    }
}

impl<'r> CheckSink<'r> {
    pub(crate) fn new(version: &Version, rules: &'r RuleSet) -> Result<CheckSink<'r>> {
        Ok(CheckSink {
            checker: Checker::new(rules, version.header())
                .map_err(|e| Error::Invalid(e.to_string()))?,
        })
    }
}

/// Check a version against rules, streaming its rows (excluded rows left out).
pub fn check_version(
    reader: &Reader<'_>,
    version: &Version,
    rules: &RuleSet,
) -> Result<CheckReport> {
    check_version_with(reader, version, rules, &crate::progress::NONE)
}

/// [`check_version`], telling `progress` how many rows are done.
pub fn check_version_with(
    reader: &Reader<'_>,
    version: &Version,
    rules: &RuleSet,
    progress: &dyn Progress,
) -> Result<CheckReport> {
    let mut sink = CheckSink::new(version, rules)?;
    crate::query::scan(reader, version, &mut [&mut sink], progress, "check")?;
    Ok(sink.checker.finish())
}
