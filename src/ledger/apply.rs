//! How one fix applies to one row: the single place that says what `set`, `recode`,
//! `missing` and `exclude` do to cells. Committing pending fixes and carrying fixes to a new
//! extract both go through [`FixApplier`], so a fix means the same on every extract.

use crate::checks::{Checker, Condition, RuleSet};
use crate::error::{Error, Result};
use crate::hash::BlobId;
use crate::model::edit::Rows;
use crate::model::{Fix, FixAction, RowId};
use crate::store::Reader;
use crate::values::transform::{Compiled, TransformError};
use std::collections::{HashMap, HashSet};

/// One cell a withdrawal puts back: column, the value before the fix, the value it set.
type Reversal<'f> = (usize, &'f Option<String>, &'f Option<String>);

/// How a fix that chooses rows finds them.
#[derive(Debug)]
enum Chooser<'f> {
    /// The fix does not choose rows.
    Nothing,
    /// These rows.
    Listed(HashSet<&'f RowId>),
    /// Rows where a condition holds.
    Where(Condition),
    /// Rows whose chosen cells repeat an earlier row's: a 128-bit BLAKE3 fingerprint of each
    /// row seen (16 bytes a row; two different rows share one with odds near 2^-128).
    Duplicates {
        columns: Option<Vec<usize>>,
        seen: HashSet<[u8; 16]>,
    },
    /// Rows a rule finds: the rules checked row by row, watching one rule's count.
    Breaking {
        checker: Box<Checker<'f>>,
        slot: usize,
        pos: u64,
    },
    /// A column the fix needs is not in this version: it chooses nothing.
    Inert,
}

/// The stored rules files that fixes choose rows by (`Rows::Breaking`), each read and parsed
/// once; appliers borrow their rules from it.
#[derive(Debug, Default)]
pub struct RuleBook(HashMap<BlobId, RuleSet>);

impl RuleBook {
    /// Reads the rules files `fixes` choose rows by.
    pub fn load<'a>(
        reader: &Reader<'_>,
        fixes: impl IntoIterator<Item = &'a Fix>,
    ) -> Result<RuleBook> {
        let mut book = HashMap::new();
        for fix in fixes {
            let Some(Rows::Breaking { rules, .. }) = fix.action.rows() else {
                continue;
            };
            if book.contains_key(rules) {
                continue;
            }
            let mut text = String::new();
            std::io::Read::read_to_string(&mut reader.open_blob(rules)?, &mut text).map_err(
                |e| Error::Corrupt(format!("rules file {} does not read: {e}", rules.short())),
            )?;
            let set = RuleSet::parse(&text).map_err(|e| {
                Error::Corrupt(format!(
                    "stored rules file {} does not parse: {e}",
                    rules.short()
                ))
            })?;
            book.insert(*rules, set);
        }
        Ok(RuleBook(book))
    }
}

/// A fix prepared against one version's header: its column index, the values it looks for
/// (hashed: a recode map may hold thousands of pairs), how it chooses rows and its transform.
#[derive(Debug)]
pub struct FixApplier<'f> {
    fix: &'f Fix,
    col: Option<usize>,
    /// For recode: from → Some(to); for missing: code → None.
    lookup: HashMap<&'f str, Option<&'f str>>,
    chooser: Chooser<'f>,
    transform: Option<Compiled<'f>>,
    /// Whether a single-row fix (set, exclude) met its row.
    found: bool,
    /// Listed rows met so far.
    met: HashSet<&'f RowId>,
    /// The rows chosen, in extract order (for fixes that sign their rows).
    chosen: Vec<RowId>,
    /// How many rows the fix chose.
    n_chosen: u64,
    /// The first cell the transform could not change, and why.
    failed: Option<(RowId, TransformError)>,
    /// For a withdrawal: per row, the cells the withdrawn fix changed (column, old, new).
    reverse: HashMap<&'f RowId, Vec<Reversal<'f>>>,
    /// For a withdrawal: cells that no longer hold the withdrawn fix's value (left as they are).
    moved_on: u64,
    /// For a withdrawal of an exclusion: the rows that come back.
    included: HashSet<&'f RowId>,
}

fn listed(rows: &Rows) -> Option<&Vec<RowId>> {
    match rows {
        Rows::Listed(r) => Some(r),
        _ => None,
    }
}

impl<'f> FixApplier<'f> {
    /// Prepares `fix` against a version's `header`; every column the fix names (its own and
    /// those of its condition) must be there, and its pattern must compile.
    pub fn new(fix: &'f Fix, header: &[String], book: &'f RuleBook) -> Result<FixApplier<'f>> {
        let idx = |c: &str| {
            header
                .iter()
                .position(|h| h == c)
                .ok_or_else(|| Error::UnknownColumn {
                    table: fix.table.clone(),
                    column: c.to_owned(),
                })
        };
        let col = fix.action.column().map(idx).transpose()?;
        let mut a = FixApplier::with_column(fix, col);
        if let Some(rows) = a.rows() {
            a.chooser = match rows {
                Rows::Listed(r) => Chooser::Listed(r.iter().collect()),
                Rows::Where(clauses) => {
                    Chooser::Where(Condition::new(clauses, header).map_err(|column| {
                        Error::UnknownColumn {
                            table: fix.table.clone(),
                            column,
                        }
                    })?)
                }
                Rows::Duplicates(cols) => Chooser::Duplicates {
                    columns: if cols.is_empty() {
                        None
                    } else {
                        Some(cols.iter().map(|c| idx(c)).collect::<Result<_>>()?)
                    },
                    seen: HashSet::new(),
                },
                Rows::Breaking { rule, rules } => {
                    let set = book.0.get(rules).ok_or_else(|| {
                        Error::Corrupt(format!("rules file {} was not loaded", rules.short()))
                    })?;
                    let checker = Checker::new(set, header).map_err(|e| {
                        Error::Invalid(format!("rule {rule} cannot be checked here: {e}"))
                    })?;
                    let slot = checker.slot_of(rule).ok_or_else(|| {
                        Error::Invalid(format!(
                            "the rules file {} has no rule {rule}",
                            rules.short()
                        ))
                    })?;
                    Chooser::Breaking {
                        checker: Box::new(checker),
                        slot,
                        pos: 0,
                    }
                }
            };
        }
        if let FixAction::Edit { transform, .. } = &fix.action {
            a.transform =
                Some(Compiled::new(transform).map_err(|e| Error::Invalid(e.to_string()))?);
        }
        Ok(a)
    }

    /// Prepares `fix` against `header` where columns may be gone (carrying to a new extract):
    /// a fix that names a column not there changes nothing.
    pub fn lenient(fix: &'f Fix, header: &[String], book: &'f RuleBook) -> FixApplier<'f> {
        FixApplier::new(fix, header, book).unwrap_or_else(|_| {
            let mut a = FixApplier::with_column(fix, None);
            a.chooser = Chooser::Inert;
            a
        })
    }

    /// Prepares a value-level or single-row fix with its column index given (`None` for
    /// fixes without a column). Fixes that choose rows need [`FixApplier::new`].
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
            chooser: Chooser::Nothing,
            transform: None,
            found: false,
            met: HashSet::new(),
            chosen: Vec::new(),
            n_chosen: 0,
            failed: None,
            reverse: HashMap::new(),
            moved_on: 0,
            included: HashSet::new(),
        }
    }

    /// Prepares a withdrawal: `fix` withdraws `original`, whose cell edits it reverses.
    pub fn reversing(
        fix: &'f Fix,
        original: &'f crate::model::FixRecord,
        header: &[String],
    ) -> FixApplier<'f> {
        let mut a = FixApplier::with_column(fix, None);
        for e in &original.edits {
            if let Some(c) = header.iter().position(|h| *h == e.column) {
                a.reverse
                    .entry(&e.row)
                    .or_default()
                    .push((c, &e.old, &e.new));
            }
        }
        match &original.fix.action {
            FixAction::Exclude { row } => {
                a.included.insert(row);
            }
            FixAction::ExcludeRows { resolved, .. } => a.included.extend(resolved.iter()),
            _ => {}
        }
        a
    }

    /// For a withdrawal, after every row: cells that no longer held the withdrawn fix's value
    /// (a later fix changed them) and were left as they are.
    pub fn moved_on(&self) -> u64 {
        self.moved_on
    }

    fn rows(&self) -> Option<&'f Rows> {
        self.fix.action.rows()
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

    /// Whether the fix chooses this row (rows are given in extract order, each once).
    fn choose(&mut self, id: &RowId, cells: &[Option<String>]) -> bool {
        match &mut self.chooser {
            Chooser::Nothing | Chooser::Inert => false,
            Chooser::Listed(rows) => match rows.get(id) {
                Some(r) => {
                    self.met.insert(r);
                    true
                }
                None => false,
            },
            Chooser::Where(c) => c.holds(cells),
            Chooser::Duplicates { columns, seen } => {
                let mut h = blake3::Hasher::new();
                let mut put = |c: &Option<String>| match c {
                    None => {
                        h.update(&[0]);
                    }
                    Some(v) => {
                        h.update(&[1]);
                        h.update(&(v.len() as u64).to_le_bytes());
                        h.update(v.as_bytes());
                    }
                };
                match columns {
                    Some(cols) => cols.iter().for_each(|&i| put(&cells[i])),
                    None => cells.iter().for_each(put),
                }
                let mut print = [0u8; 16];
                print.copy_from_slice(&h.finalize().as_bytes()[..16]);
                !seen.insert(print)
            }
            Chooser::Breaking { checker, slot, pos } => {
                *pos += 1;
                let before = checker.violations_of(*slot);
                let refs: Vec<Option<&str>> = cells.iter().map(Option::as_deref).collect();
                checker.push_row(*pos, id.as_str(), &refs);
                checker.violations_of(*slot) > before
            }
        }
    }

    /// Whether the fix would change (or, for keep, note and exclude, choose) this row; for
    /// counting matches on a new extract. Rows are given in extract order, each once.
    pub fn matches(&mut self, id: &RowId, cells: &[Option<String>]) -> bool {
        match (&self.fix.action, self.col) {
            (FixAction::Recode { .. } | FixAction::Missing { .. }, Some(c)) => cells[c]
                .as_deref()
                .is_some_and(|v| self.value_for(v).is_some()),
            (FixAction::Edit { .. }, Some(c)) => {
                self.choose(id, cells)
                    && self
                        .transform
                        .as_ref()
                        .and_then(|t| t.apply(cells[c].as_deref()).ok())
                        .is_some_and(|new| new != cells[c])
            }
            (
                FixAction::ExcludeRows { .. } | FixAction::Keep { .. } | FixAction::Note { .. },
                _,
            ) => self.choose(id, cells),
            _ => false,
        }
    }

    /// Applies the fix to the row `id`: changes `cells` and `excluded` in place, and calls
    /// `changed(column, old, new)` for each cell whose value it changes. Rows are given in
    /// extract order, each once.
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
            FixAction::Edit { .. } => {
                let Some(c) = self.col else { return };
                if self.choose(id, cells) {
                    // An edit signs its cells, not its rows: count them only.
                    self.n_chosen += 1;
                    let t = self.transform.as_ref().expect("an edit has its transform");
                    match t.apply(cells[c].as_deref()) {
                        Ok(new) => put(c, new, cells),
                        Err(e) => {
                            if self.failed.is_none() {
                                self.failed = Some((id.clone(), e));
                            }
                        }
                    }
                }
            }
            FixAction::ExcludeRows { .. } => {
                if self.choose(id, cells) {
                    self.chosen.push(id.clone());
                    self.n_chosen += 1;
                    *excluded = true;
                }
            }
            FixAction::Keep { .. } | FixAction::Note { .. } => {
                if self.choose(id, cells) {
                    self.chosen.push(id.clone());
                    self.n_chosen += 1;
                }
            }
            FixAction::Withdraw { .. } => {
                if self.included.contains(id) {
                    *excluded = false;
                }
                if let Some(list) = self.reverse.get(id) {
                    for &(c, old, new) in list {
                        if cells[c] == *new {
                            put(c, old.clone(), cells);
                        } else {
                            self.moved_on += 1;
                        }
                    }
                }
            }
            FixAction::Distrust { .. } | FixAction::Rules { .. } => {}
        }
    }

    /// After every row: a row the fix names that it never met.
    pub fn missed_row(&self) -> Option<&'f RowId> {
        match &self.fix.action {
            FixAction::Set { row, .. } | FixAction::Exclude { row } if !self.found => Some(row),
            _ => self
                .rows()
                .and_then(listed)
                .and_then(|rows| rows.iter().find(|r| !self.met.contains(r))),
        }
    }

    /// After every row: the rows the fix chose, in extract order (kept for exclusions, kept
    /// values and notes, which sign their rows).
    pub fn chosen(&self) -> &[RowId] {
        &self.chosen
    }

    /// How many rows the fix has chosen so far.
    pub fn n_chosen(&self) -> u64 {
        self.n_chosen
    }

    /// After every row: the first chosen cell the transform could not change, and why.
    pub fn failed(&self) -> Option<&(RowId, TransformError)> {
        self.failed.as_ref()
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
        assert!(
            !a.matches(&RowId("S-1".into()), &row),
            "a recoded cell no longer matches"
        );
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
        assert!(a.matches(&RowId("1".into()), &row));
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
