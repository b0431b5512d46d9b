//! How one fix applies to one row: the single place that says what `set`, `recode`,
//! `missing` and `exclude` do to cells. Committing pending fixes and carrying fixes to a new
//! extract both go through [`FixApplier`], so a fix means the same on every extract.

use crate::error::Result;
use crate::model::{Fix, FixAction, RowId};
use crate::query::Version;
use std::collections::HashMap;

/// A fix prepared against one version's header: its column index and, for value-level fixes,
/// the values it looks for, hashed (a recode map may hold thousands of pairs).
#[derive(Debug)]
pub struct FixApplier<'f> {
    fix: &'f Fix,
    col: Option<usize>,
    /// For recode: from → Some(to); for missing: code → None.
    lookup: HashMap<&'f str, Option<&'f str>>,
    /// Whether a row-level fix (set, exclude) met its row.
    found: bool,
}

impl<'f> FixApplier<'f> {
    /// Prepares `fix` against `version`'s header; the fix's column must exist there.
    pub fn new(fix: &'f Fix, version: &Version) -> Result<FixApplier<'f>> {
        let col = fix
            .action
            .column()
            .map(|c| version.col_idx(c))
            .transpose()?;
        Ok(FixApplier::with_column(fix, col))
    }

    /// Prepares `fix` with its column index given (`None` for fixes without a column).
    pub fn with_column(fix: &'f Fix, col: Option<usize>) -> FixApplier<'f> {
        let lookup = match &fix.action {
            // First match wins, as documented: keep the first pair for each `from`.
            FixAction::Recode { pairs, .. } => {
                let mut m = HashMap::with_capacity(pairs.len());
                for (from, to) in pairs {
                    m.entry(from.as_str()).or_insert(Some(to.as_str()));
                }
                m
            }
            FixAction::Missing { codes, .. } => codes.iter().map(|c| (c.as_str(), None)).collect(),
            _ => HashMap::new(),
        };
        FixApplier {
            fix,
            col,
            lookup,
            found: false,
        }
    }

    /// The fix.
    pub fn fix(&self) -> &'f Fix {
        self.fix
    }

    /// The column the fix acts on, in the version it was prepared against.
    pub fn column(&self) -> Option<usize> {
        self.col
    }

    /// For a value-level fix (recode, missing): the value it gives a cell holding `value`, or
    /// `None` when it leaves that value alone. `Some(None)` makes the cell missing.
    pub fn value_for(&self, value: &str) -> Option<Option<&'f str>> {
        self.lookup.get(value).copied()
    }

    /// Whether a value-level fix would change this row's cell.
    pub fn matches(&self, cells: &[Option<String>]) -> bool {
        match (&self.fix.action, self.col) {
            (FixAction::Recode { .. } | FixAction::Missing { .. }, Some(c)) => cells[c]
                .as_deref()
                .is_some_and(|v| self.value_for(v).is_some()),
            _ => false,
        }
    }

    /// Applies the fix to the row `id`: changes `cells` and `excluded` in place, and calls
    /// `changed(column, old, new)` for each cell whose value it changes.
    pub fn apply(
        &mut self,
        id: &RowId,
        cells: &mut [Option<String>],
        excluded: &mut bool,
        mut changed: impl FnMut(usize, Option<String>, Option<String>),
    ) {
        let mut put = |col: usize, new: Option<String>, cells: &mut [Option<String>]| {
            let old = std::mem::replace(&mut cells[col], new.clone());
            if old != new {
                changed(col, old, new);
            }
        };
        match &self.fix.action {
            FixAction::Set { row, value, .. } => {
                if row == id {
                    self.found = true;
                    put(self.col.expect("set names a column"), value.clone(), cells);
                }
            }
            FixAction::Recode { .. } | FixAction::Missing { .. } => {
                let c = self.col.expect("recode and missing name a column");
                if let Some(v) = cells[c].as_deref()
                    && let Some(new) = self.value_for(v)
                {
                    put(c, new.map(str::to_string), cells);
                }
            }
            FixAction::Exclude { row } => {
                if row == id {
                    self.found = true;
                    *excluded = true;
                }
            }
            FixAction::Distrust { .. } | FixAction::Rules { .. } => {}
        }
    }

    /// For a row-level fix (set, exclude) that never met its row: the row it names.
    pub fn missed_row(&self) -> Option<&'f RowId> {
        match &self.fix.action {
            FixAction::Set { row, .. } | FixAction::Exclude { row } if !self.found => Some(row),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fix(action: FixAction) -> Fix {
        Fix {
            table: "samples".into(),
            action,
            why: "test".into(),
            evidence: Vec::new(),
            consulted: None,
            origins: Vec::new(),
        }
    }

    fn cells(values: &[Option<&str>]) -> Vec<Option<String>> {
        values.iter().map(|v| v.map(str::to_string)).collect()
    }

    #[test]
    fn recode_keeps_the_first_pair_for_each_value_and_reports_each_change() {
        let f = fix(FixAction::Recode {
            column: "site".into(),
            pairs: vec![
                ("mill craek".into(), "Mill Creek".into()),
                ("mill craek".into(), "Other".into()),
            ],
        });
        let mut a = FixApplier::with_column(&f, Some(1));
        let mut row = cells(&[Some("S-1"), Some("mill craek")]);
        let mut excluded = false;
        let mut seen = Vec::new();
        a.apply(
            &RowId("S-1".into()),
            &mut row,
            &mut excluded,
            |c, old, new| seen.push((c, old, new)),
        );
        assert_eq!(row[1].as_deref(), Some("Mill Creek"));
        assert_eq!(
            seen,
            vec![(1, Some("mill craek".into()), Some("Mill Creek".into()))]
        );
        assert!(!a.matches(&row), "a recoded cell no longer matches");
    }

    #[test]
    fn missing_blanks_only_its_codes_and_row_fixes_name_rows_they_never_met() {
        let m = fix(FixAction::Missing {
            column: "turbidity".into(),
            codes: vec!["-999".into()],
        });
        let mut a = FixApplier::with_column(&m, Some(0));
        let mut excluded = false;
        let mut row = cells(&[Some("-999")]);
        assert!(a.matches(&row));
        a.apply(&RowId("1".into()), &mut row, &mut excluded, |_, _, _| {});
        assert_eq!(row[0], None);
        let mut other = cells(&[Some("-99")]);
        a.apply(&RowId("2".into()), &mut other, &mut excluded, |_, _, _| {
            panic!("-99 is not a code of this fix")
        });
        let e = fix(FixAction::Exclude {
            row: RowId("S-9".into()),
        });
        let mut x = FixApplier::with_column(&e, None);
        x.apply(&RowId("S-1".into()), &mut row, &mut excluded, |_, _, _| {});
        assert!(!excluded);
        assert_eq!(x.missed_row().map(RowId::as_str), Some("S-9"));
        x.apply(&RowId("S-9".into()), &mut row, &mut excluded, |_, _, _| {});
        assert!(excluded);
        assert_eq!(x.missed_row(), None);
    }
}
