//! Evaluating a [`RuleSet`] over a table, one row at a time.
//!
//! Memory stays bounded whatever the number of rows, with one exception: a `unique` rule
//! keeps, per distinct value, a 64-bit hash of the value and the position of its first row
//! (16 bytes of payload, about 20 to 40 bytes with the hash map's control bytes and spare
//! capacity), so a million-row key column costs some 20–40 MB. Two different values whose
//! hashes collide would be reported as a repeat; by the birthday bound (from memory) the
//! chance is about n² / 2^65 for n distinct values, some three in a million at ten million
//! rows. Flag counting keeps at most [`TRACKED_VALUES`] values per column. Nothing here
//! reads files or prints.

use std::collections::hash_map::{DefaultHasher, Entry};
use std::collections::{HashMap, HashSet};
use std::hash::{Hash, Hasher};

use super::error::RuleError;
use super::outcome::{
    CheckReport, ColumnFlag, FlagKind, MAX_EXAMPLES, RuleOutcome, Severity, Violation,
};
use super::rules::{
    Bounds, Clause, ColumnRules, Condition, FlagThresholds, Literal, Operand, RuleSet,
    format_number,
};
use super::value::{Domain, Test, ValueType, parse_date, parse_number};
use crate::model::RowBatch;

/// The most distinct values counted per column for the near-constant flag; past it,
/// counting is approximate (the Misra–Gries summary, from memory) and the share a lower
/// bound that is off by at most one part in `TRACKED_VALUES + 1` of the present cells.
pub const TRACKED_VALUES: usize = 1000;

/// Checks rows against a [`RuleSet`]: [`Checker::new`], then [`Checker::push_row`] for every
/// row, then [`Checker::finish`].
///
/// A cell is missing when it is `None`, blank (empty or only whitespace), or, after
/// trimming, equal to one of the column's `missing_codes`. Missing cells break only
/// `required` (and conditions that ask for presence); every other rule judges present cells,
/// compared after trimming surrounding whitespace.
///
/// ```
/// use emend::checks::{Checker, RuleSet};
///
/// let rules = RuleSet::parse(
///     "[columns.ph]\n\
///      missing_codes = [-9]\n\
///      hard = { min = 0, max = 14 }\n",
/// )
/// .unwrap();
/// let header = vec!["site".to_string(), "ph".to_string()];
/// let mut checker = Checker::new(&rules, &header).unwrap();
/// checker.push_row(1, "1", &[Some("A"), Some("7.2")]);
/// checker.push_row(2, "2", &[Some("B"), Some("-9")]);
/// checker.push_row(3, "3", &[Some("C"), Some("71")]);
/// let report = checker.finish();
/// assert!(!report.passed());
/// assert_eq!(report.rules[0].id, "ph.hard");
/// assert_eq!(report.rules[0].violations, 1);
/// assert_eq!(report.rules[0].examples[0].message, "71 is above the hard maximum 14");
/// ```
#[derive(Debug)]
pub struct Checker<'r> {
    n_rows: u64,
    /// Outcomes in the order they were built; sorted by line in `finish`.
    outcomes: Vec<RuleOutcome>,
    columns: Vec<ColumnCheck<'r>>,
    conditions: Vec<ConditionCheck<'r>>,
    /// Per header column: its missing-value codes and declared type.
    cols: Vec<ColumnInfo<'r>>,
    thresholds: &'r FlagThresholds,
    /// Per header column, when the rules have `[flags]`.
    flags: Option<Vec<FlagCounts>>,
}

/// What every rule needs to know about one header column.
#[derive(Debug)]
struct ColumnInfo<'r> {
    name: String,
    missing_codes: &'r [String],
    value_type: Option<ValueType>,
}

/// The rules of one column, resolved to its index and outcome slots.
#[derive(Debug)]
struct ColumnCheck<'r> {
    rules: &'r ColumnRules,
    col_idx: usize,
    type_slot: Option<usize>,
    required_slot: Option<usize>,
    unique: Option<(usize, HashMap<u64, u64>)>,
    levels: Option<(usize, HashSet<&'r str>)>,
    pattern_slot: Option<usize>,
    hard_slot: Option<usize>,
    soft_slot: Option<usize>,
    /// This column's outcome slots are `first_slot..first_slot + n_slots`.
    first_slot: usize,
    n_slots: usize,
}

/// One condition, with its columns resolved.
#[derive(Debug)]
struct ConditionCheck<'r> {
    slot: usize,
    when: Vec<ResolvedClause<'r>>,
    then: Vec<ResolvedClause<'r>>,
}

#[derive(Debug)]
struct ResolvedClause<'r> {
    clause: &'r Clause,
    col_idx: usize,
    /// The column of `value_of`, when the clause compares two columns.
    other_idx: Option<usize>,
}

/// One column's counts for the `[flags]` thresholds.
#[derive(Debug, Default)]
struct FlagCounts {
    missing: u64,
    /// Present cells, and their value counts when near-constant is asked for.
    present: u64,
    values: Option<TopValues>,
}

impl FlagCounts {
    fn push(&mut self, value: Option<&str>) {
        match value {
            None => self.missing += 1,
            Some(value) => {
                self.present += 1;
                if let Some(values) = &mut self.values {
                    values.push(value);
                }
            }
        }
    }
}

/// A Misra–Gries summary (from memory): at most `TRACKED_VALUES` counters; when a new value
/// finds them full, every counter drops by one and the value is not kept. A count is then
/// low by at most the number of such drops, which is at most n / (TRACKED_VALUES + 1).
#[derive(Debug, Default)]
struct TopValues {
    counts: HashMap<String, u64>,
    drops: u64,
}

impl TopValues {
    fn push(&mut self, value: &str) {
        if let Some(count) = self.counts.get_mut(value) {
            *count += 1;
        } else if self.counts.len() < TRACKED_VALUES {
            self.counts.insert(value.to_owned(), 1);
        } else {
            self.drops += 1;
            self.counts.retain(|_, count| {
                *count -= 1;
                *count > 0
            });
        }
    }

    /// The most frequent value and its (lower-bound) count; ties go to the smaller value.
    fn top(&self) -> Option<(&str, u64)> {
        self.counts
            .iter()
            .map(|(value, &count)| (value.as_str(), count))
            .max_by(|a, b| a.1.cmp(&b.1).then_with(|| b.0.cmp(a.0)))
    }
}

impl<'r> Checker<'r> {
    /// Resolves the rules against a table header.
    ///
    /// # Errors
    ///
    /// A [`RuleError`] at the first place (in file order) that names a column the header
    /// lacks, or a column the header has twice.
    pub fn new(rules: &'r RuleSet, header: &[String]) -> Result<Checker<'r>, RuleError> {
        let mut index: HashMap<&str, usize> = HashMap::new();
        let mut twice: HashSet<&str> = HashSet::new();
        for (col_idx, name) in header.iter().enumerate() {
            if index.insert(name, col_idx).is_some() {
                twice.insert(name);
            }
        }
        let mut refs: Vec<_> = rules.column_refs().collect();
        refs.sort_by_key(|r| (r.pos.line, r.pos.column));
        for r in refs {
            let message = if twice.contains(r.name.as_str()) {
                format!(
                    "column `{}` appears more than once in the table header",
                    r.name
                )
            } else if !index.contains_key(r.name.as_str()) {
                format!("column `{}` is not in the table header", r.name)
            } else {
                continue;
            };
            return Err(r.pos.error(Some(&r.key), message));
        }
        let col = |name: &str| {
            *index
                .get(name)
                .expect("every named column was checked above")
        };

        let cols = header
            .iter()
            .map(|name| {
                let column_rules = rules.column_rules(name);
                ColumnInfo {
                    name: name.clone(),
                    missing_codes: column_rules.map_or(&[], |c| c.missing_codes.as_slice()),
                    value_type: column_rules.and_then(|c| c.value_type.as_ref().map(|t| t.value)),
                }
            })
            .collect();

        let mut outcomes = Vec::new();
        let mut slot = |id: String, description: String, severity: Severity, line: usize| {
            outcomes.push(RuleOutcome {
                id,
                description,
                severity,
                line,
                violations: 0,
                examples: Vec::new(),
            });
            outcomes.len() - 1
        };
        let mut columns: Vec<ColumnCheck<'r>> = Vec::new();
        let mut next_slot = 0;
        for c in &rules.columns {
            let name = c.column.name.as_str();
            let id = |kind: &str| format!("{name}.{kind}");
            columns.push(ColumnCheck {
                rules: c,
                col_idx: col(name),
                type_slot: c.value_type.as_ref().map(|t| {
                    let description = format!("{name} is {}", t.value.phrase());
                    slot(id("type"), description, Severity::Error, t.pos.line)
                }),
                required_slot: c.required.map(|pos| {
                    let description = format!("{name} is present in every row");
                    slot(id("required"), description, Severity::Error, pos.line)
                }),
                unique: c.unique.map(|pos| {
                    let description = format!("{name} holds no value twice");
                    (
                        slot(id("unique"), description, Severity::Error, pos.line),
                        HashMap::new(),
                    )
                }),
                levels: c.levels.as_ref().map(|levels| {
                    let description = format!("{name} is one of {}", list_levels(&levels.value));
                    let set = levels.value.iter().map(String::as_str).collect();
                    (
                        slot(id("levels"), description, Severity::Error, levels.pos.line),
                        set,
                    )
                }),
                pattern_slot: c.pattern.as_ref().map(|p| {
                    let description = format!("{name} matches the pattern {}", p.value.source);
                    slot(id("pattern"), description, Severity::Error, p.pos.line)
                }),
                hard_slot: c.hard.as_ref().map(|b| {
                    let description = format!(
                        "{name} is {} (hard: anything else is impossible)",
                        range(&b.value)
                    );
                    slot(id("hard"), description, Severity::Error, b.pos.line)
                }),
                soft_slot: c.soft.as_ref().map(|b| {
                    let description = format!(
                        "{name} is {} (soft: anything else is implausible)",
                        range(&b.value)
                    );
                    slot(id("soft"), description, Severity::Warning, b.pos.line)
                }),
                first_slot: 0,
                n_slots: 0,
            });
            // The slots just made for this column follow the previous column's.
            let check = columns.last_mut().expect("just pushed");
            let slots = [
                check.type_slot,
                check.required_slot,
                check.unique.as_ref().map(|u| u.0),
                check.levels.as_ref().map(|l| l.0),
                check.pattern_slot,
                check.hard_slot,
                check.soft_slot,
            ];
            check.n_slots = slots.iter().flatten().count();
            check.first_slot = slots.iter().flatten().min().copied().unwrap_or(next_slot);
            next_slot += check.n_slots;
        }
        let mut conditions = Vec::new();
        for condition in &rules.conditions {
            let description = condition
                .description
                .clone()
                .unwrap_or_else(|| describe(condition));
            let resolve = |clauses: &'r [Clause]| -> Vec<ResolvedClause<'r>> {
                clauses
                    .iter()
                    .map(|clause| ResolvedClause {
                        clause,
                        col_idx: col(&clause.column.name),
                        other_idx: match &clause.operand {
                            Operand::Column(other) => Some(col(&other.name)),
                            _ => None,
                        },
                    })
                    .collect()
            };
            conditions.push(ConditionCheck {
                slot: slot(
                    condition.id.clone(),
                    description,
                    condition.severity,
                    condition.pos.line,
                ),
                when: resolve(&condition.when),
                then: resolve(&condition.then),
            });
        }
        let thresholds = &rules.flags;
        let flags = (thresholds.mostly_missing.is_some() || thresholds.near_constant.is_some())
            .then(|| {
                header
                    .iter()
                    .map(|_| FlagCounts {
                        values: thresholds
                            .near_constant
                            .as_ref()
                            .map(|_| TopValues::default()),
                        ..FlagCounts::default()
                    })
                    .collect()
            });
        Ok(Checker {
            n_rows: 0,
            outcomes,
            columns,
            conditions,
            cols,
            thresholds,
            flags,
        })
    }

    /// The slot of the rule `id` (`ph.hard`, a condition's id) among those checked, for
    /// [`Checker::violations_of`]; `None` when the rules have no such rule for this header.
    pub fn slot_of(&self, id: &str) -> Option<usize> {
        self.outcomes.iter().position(|o| o.id == id)
    }

    /// How many rows the rule in `slot` has found so far.
    pub fn violations_of(&self, slot: usize) -> u64 {
        self.outcomes[slot].violations
    }

    /// Checks one row.
    ///
    /// `pos` is the row's 1-based position and `row` the name to show for it (its key, or
    /// its position). `cells` follows the header: `None` is a missing cell, `Some("")` a
    /// blank one; cells past the end of a short row count as missing, extra cells are ignored.
    pub fn push_row(&mut self, pos: u64, row: &str, cells: &[Option<&str>]) {
        self.n_rows += 1;
        let cell = |col_idx: usize| cells.get(col_idx).copied().flatten();
        let name = || row.to_owned();
        for check in &mut self.columns {
            let base = check.first_slot;
            check_column(
                check,
                &self.cols,
                &mut self.outcomes[base..],
                pos,
                &name,
                &cell,
            );
        }
        for check in &self.conditions {
            check_condition(
                check,
                &self.cols,
                &mut self.outcomes[check.slot],
                pos,
                &name,
                &cell,
            );
        }
        if let Some(flags) = &mut self.flags {
            for (col_idx, (info, counts)) in self.cols.iter().zip(flags.iter_mut()).enumerate() {
                counts.push(present(cell(col_idx), info.missing_codes));
            }
        }
    }

    /// Checks the rows `rows` of `batch`, in that order, as [`Checker::push_row`] would one by
    /// one; `name(r)` is the name shown for row `r` of the batch (asked for only when the row
    /// breaks a rule). Each column's rules, each condition and each column's flag counts run
    /// side by side on the caller's thread pool, each over the rows in order, so the report is
    /// the same with one thread or many.
    pub fn push_batch(
        &mut self,
        batch: &RowBatch,
        rows: &[usize],
        name: &(dyn Fn(usize) -> String + Sync),
    ) {
        use rayon::prelude::*;
        self.n_rows += rows.len() as u64;
        // Each unit's outcome slots are one run of the slot list: cut it into those runs.
        let mut rest: &mut [RuleOutcome] = &mut self.outcomes;
        let mut taken = 0;
        let mut column_slots = Vec::with_capacity(self.columns.len());
        for check in &self.columns {
            let (mine, tail) = std::mem::take(&mut rest).split_at_mut(check.n_slots);
            debug_assert!(check.n_slots == 0 || check.first_slot == taken);
            taken += check.n_slots;
            column_slots.push(mine);
            rest = tail;
        }
        let mut condition_slots = Vec::with_capacity(self.conditions.len());
        for check in &self.conditions {
            debug_assert_eq!(check.slot, taken);
            let (mine, tail) = std::mem::take(&mut rest).split_at_mut(1);
            taken += 1;
            condition_slots.push(&mut mine[0]);
            rest = tail;
        }
        enum Unit<'u, 'r> {
            Column(&'u mut ColumnCheck<'r>, &'u mut [RuleOutcome]),
            Condition(&'u ConditionCheck<'r>, &'u mut RuleOutcome),
            Flags(usize, &'u mut FlagCounts),
        }
        let mut units: Vec<Unit<'_, 'r>> = Vec::new();
        units.extend(
            self.columns
                .iter_mut()
                .zip(column_slots)
                .map(|(c, o)| Unit::Column(c, o)),
        );
        units.extend(
            self.conditions
                .iter()
                .zip(condition_slots)
                .map(|(c, o)| Unit::Condition(c, o)),
        );
        if let Some(flags) = &mut self.flags {
            units.extend(flags.iter_mut().enumerate().map(|(c, f)| Unit::Flags(c, f)));
        }
        let cols = &self.cols;
        units.into_par_iter().for_each(|unit| match unit {
            Unit::Column(check, outcomes) => {
                for &r in rows {
                    check_column(check, cols, outcomes, batch.pos(r), &|| name(r), &|c| {
                        batch.cell(r, c)
                    });
                }
            }
            Unit::Condition(check, outcome) => {
                for &r in rows {
                    check_condition(check, cols, outcome, batch.pos(r), &|| name(r), &|c| {
                        batch.cell(r, c)
                    });
                }
            }
            Unit::Flags(c, counts) => {
                let codes = cols[c].missing_codes;
                for &r in rows {
                    counts.push(present(batch.cell(r, c), codes));
                }
            }
        });
    }

    /// Ends the check and hands back the report.
    pub fn finish(self) -> CheckReport {
        let mut rules = self.outcomes;
        rules.sort_by_key(|rule| rule.line);
        let mut flags = Vec::new();
        if let Some(counts) = &self.flags {
            for (col_idx, info) in self.cols.iter().enumerate() {
                let counts = &counts[col_idx];
                if let Some(threshold) = &self.thresholds.mostly_missing {
                    let share = ratio(counts.missing, self.n_rows);
                    if self.n_rows > 0 && share > threshold.value {
                        flags.push(ColumnFlag {
                            column: info.name.to_owned(),
                            kind: FlagKind::MostlyMissing,
                            share,
                            threshold: threshold.value,
                            line: threshold.pos.line,
                            value: None,
                            exact: true,
                        });
                    }
                }
                let (Some(threshold), Some(values)) =
                    (&self.thresholds.near_constant, &counts.values)
                else {
                    continue;
                };
                let present = counts.present;
                if let Some((value, count)) = values.top() {
                    let share = ratio(count, present);
                    if share >= threshold.value {
                        flags.push(ColumnFlag {
                            column: info.name.to_owned(),
                            kind: FlagKind::NearConstant,
                            share,
                            threshold: threshold.value,
                            line: threshold.pos.line,
                            value: Some(value.to_owned()),
                            exact: values.drops == 0,
                        });
                    }
                }
            }
        }
        CheckReport {
            n_rows: self.n_rows,
            rules,
            flags,
        }
    }
}

/// A cell of the row being checked, by column index: `None` is missing.
type CellOf<'c, 'v> = dyn Fn(usize) -> Option<&'v str> + 'c;

/// One column's rules over one row. `outcomes` starts at the column's first slot.
fn check_column<'v>(
    check: &mut ColumnCheck<'_>,
    cols: &[ColumnInfo<'_>],
    outcomes: &mut [RuleOutcome],
    pos: u64,
    row: &dyn Fn() -> String,
    raw: &CellOf<'_, 'v>,
) {
    let base = check.first_slot;
    let rules = check.rules;
    let name = rules.column.name.as_str();
    let cell = raw(check.col_idx);
    let violation = |message: String, other_pos: Option<u64>| Violation {
        pos,
        row: row(),
        column: Some(name.to_owned()),
        value: cell.map(str::to_owned),
        other_pos,
        message,
    };
    let Some(value) = present(cell, cols[check.col_idx].missing_codes) else {
        if let Some(slot) = check.required_slot {
            record(&mut outcomes[slot - base], || {
                let message = match cell.map(str::trim) {
                    None => "the cell is missing".to_owned(),
                    Some("") => "the cell is blank".to_owned(),
                    Some(code) => format!("the cell holds the missing-value code {code:?}"),
                };
                violation(message, None)
            });
        }
        return;
    };
    if let (Some(slot), Some(t)) = (check.type_slot, &rules.value_type)
        && !t.value.accepts(value)
    {
        record(&mut outcomes[slot - base], || {
            violation(format!("{value:?} is not {}", t.value.phrase()), None)
        });
    }
    if let Some((slot, seen)) = &mut check.unique {
        let mut hasher = DefaultHasher::new();
        value.hash(&mut hasher);
        match seen.entry(hasher.finish()) {
            Entry::Occupied(first) => {
                let first = *first.get();
                record(&mut outcomes[*slot - base], || {
                    violation(format!("{value:?} also at position {first}"), Some(first))
                });
            }
            Entry::Vacant(entry) => {
                entry.insert(pos);
            }
        }
    }
    if let Some((slot, levels)) = &check.levels
        && !levels.contains(value)
    {
        record(&mut outcomes[*slot - base], || {
            violation(format!("{value:?} is not an allowed level"), None)
        });
    }
    if let (Some(slot), Some(p)) = (check.pattern_slot, &rules.pattern)
        && !p.value.regex.is_match(value)
    {
        record(&mut outcomes[slot - base], || {
            violation(format!("{value:?} does not match {}", p.value.source), None)
        });
    }
    for (slot, bounds, word) in [
        (check.hard_slot, &rules.hard, "hard"),
        (check.soft_slot, &rules.soft, "soft"),
    ] {
        let (Some(slot), Some(bounds)) = (slot, bounds) else {
            continue;
        };
        if let Some(message) = out_of_bounds(&bounds.value, value, word) {
            record(&mut outcomes[slot - base], || violation(message, None));
        }
    }
}

/// One condition over one row.
fn check_condition<'v>(
    check: &ConditionCheck<'_>,
    cols: &[ColumnInfo<'_>],
    outcome: &mut RuleOutcome,
    pos: u64,
    row: &dyn Fn() -> String,
    raw: &CellOf<'_, 'v>,
) {
    let value_at = |col_idx: usize| present(raw(col_idx), cols[col_idx].missing_codes);
    let holds = |c: &ResolvedClause<'_>| clause_holds(c, cols, raw);
    if !check.when.iter().all(|c| holds(c) == Some(true)) {
        return;
    }
    let Some(failed) = check.then.iter().find(|c| holds(c) == Some(false)) else {
        return;
    };
    let cell = raw(failed.col_idx);
    let found = match value_at(failed.col_idx) {
        Some(value) => format!("{value:?}"),
        None => "it missing".to_owned(),
    };
    let mut expected = clause_text(failed.clause);
    if let Some(other_idx) = failed.other_idx
        && let Some(other) = value_at(other_idx)
    {
        expected.push_str(&format!(" ({other:?})"));
    }
    record(outcome, || Violation {
        pos,
        row: row(),
        column: Some(failed.clause.column.name.clone()),
        value: cell.map(str::to_owned),
        other_pos: None,
        message: format!("expected {expected}, found {found}"),
    });
}

/// Whether a clause holds in this row: `None` when it cannot say (a compared cell is
/// missing, or does not read as the type being compared).
fn clause_holds<'v>(
    c: &ResolvedClause<'_>,
    cols: &[ColumnInfo<'_>],
    raw: &CellOf<'_, 'v>,
) -> Option<bool> {
    let value = |col_idx: usize| present(raw(col_idx), cols[col_idx].missing_codes);
    let left = value(c.col_idx);
    let test = c.clause.test;
    match test {
        Test::IsMissing => return Some(left.is_none()),
        Test::IsPresent => return Some(left.is_some()),
        _ => {}
    }
    let a = left?;
    let declared = cols[c.col_idx].value_type.map(ValueType::domain);
    let domain = |literal: &Literal| {
        declared
            .or(literal.domain)
            .unwrap_or_else(|| Domain::infer(a, &literal.text))
    };
    match &c.clause.operand {
        Operand::Nothing => None,
        Operand::Value(literal) => test.compare(domain(literal), a, &literal.text),
        Operand::Values(literals) => Some(literals.iter().any(|l| domain(l).equal(a, &l.text))),
        Operand::Column(_) => {
            let other_idx = c
                .other_idx
                .expect("value_of clauses resolve their other column");
            let b = value(other_idx)?;
            let domain = declared
                .or(cols[other_idx].value_type.map(ValueType::domain))
                .unwrap_or_else(|| Domain::infer(a, b));
            test.compare(domain, a, b)
        }
    }
}

/// The trimmed value of a cell, or `None` when it is missing: absent, blank, or one of the
/// column's missing-value codes.
pub(crate) fn present<'c>(raw: Option<&'c str>, missing_codes: &[String]) -> Option<&'c str> {
    let value = raw?.trim();
    (!value.is_empty() && !missing_codes.iter().any(|code| code == value)).then_some(value)
}

/// Counts one violation, keeping it as an example while there is room.
fn record(outcome: &mut RuleOutcome, violation: impl FnOnce() -> Violation) {
    outcome.violations += 1;
    if outcome.examples.len() < MAX_EXAMPLES {
        outcome.examples.push(violation());
    }
}

/// `part / whole`, or 0 for an empty whole.
fn ratio(part: u64, whole: u64) -> f64 {
    if whole == 0 {
        0.0
    } else {
        part as f64 / whole as f64
    }
}

/// Why `value` breaks `bounds`, or `None` when it keeps them (or is not a number or date:
/// the type rule reports those).
pub(crate) fn out_of_bounds(bounds: &Bounds, value: &str, word: &str) -> Option<String> {
    match *bounds {
        Bounds::Number { min, max } => {
            let x = parse_number(value)?;
            if let Some(lo) = min.filter(|&lo| x < lo) {
                Some(format!(
                    "{value} is below the {word} minimum {}",
                    format_number(lo)
                ))
            } else {
                max.filter(|&hi| x > hi)
                    .map(|hi| format!("{value} is above the {word} maximum {}", format_number(hi)))
            }
        }
        Bounds::Date { min, max } => {
            let d = parse_date(value)?;
            if let Some(lo) = min.filter(|&lo| d < lo) {
                Some(format!("{value} is before the {word} minimum {lo}"))
            } else {
                max.filter(|&hi| d > hi)
                    .map(|hi| format!("{value} is after the {word} maximum {hi}"))
            }
        }
    }
}

/// "between 0 and 14", "at least 0", "on or after 2012-03-01".
fn range(bounds: &Bounds) -> String {
    let (min, max, date) = match *bounds {
        Bounds::Number { min, max } => (min.map(format_number), max.map(format_number), false),
        Bounds::Date { min, max } => (min.map(|d| d.to_string()), max.map(|d| d.to_string()), true),
    };
    match (min, max, date) {
        (Some(lo), Some(hi), _) => format!("between {lo} and {hi}"),
        (Some(lo), None, false) => format!("at least {lo}"),
        (None, Some(hi), false) => format!("at most {hi}"),
        (Some(lo), None, true) => format!("on or after {lo}"),
        (None, Some(hi), true) => format!("on or before {hi}"),
        (None, None, _) => "anything".to_owned(),
    }
}

/// The allowed levels for a description, shortened past eight.
fn list_levels(levels: &[String]) -> String {
    const SHOWN: usize = 8;
    let shown: Vec<String> = levels
        .iter()
        .take(SHOWN)
        .map(|l| format!("{l:?}"))
        .collect();
    let mut text = shown.join(", ");
    if levels.len() > SHOWN {
        text.push_str(&format!(" and {} more", levels.len() - SHOWN));
    }
    text
}

/// A clause as words: `score is missing`, `ph lt 9`, `weather in ("rain", "snow")`.
fn clause_text(clause: &Clause) -> String {
    let literal = |l: &Literal| match l.domain {
        None => format!("{:?}", l.text),
        Some(_) => l.text.clone(),
    };
    let column = &clause.column.name;
    let test = clause.test.word();
    match &clause.operand {
        Operand::Nothing => format!("{column} {test}"),
        Operand::Value(l) => format!("{column} {test} {}", literal(l)),
        Operand::Values(ls) => {
            let items: Vec<String> = ls.iter().map(literal).collect();
            format!("{column} {test} ({})", items.join(", "))
        }
        Operand::Column(other) => format!("{column} {test} {}", other.name),
    }
}

/// The default description of a condition: `when A then B`.
fn describe(condition: &Condition) -> String {
    let join = |clauses: &[Clause]| {
        clauses
            .iter()
            .map(clause_text)
            .collect::<Vec<_>>()
            .join(" and ")
    };
    format!(
        "when {} then {}",
        join(&condition.when),
        join(&condition.then)
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Checks `table` against `rules`. The table is comma-separated with a header line; a
    /// cell written `~` is absent (`None`). Rows are named by their position.
    fn run(rules: &str, table: &str) -> CheckReport {
        let rules = RuleSet::parse(rules).unwrap_or_else(|err| panic!("{err}"));
        let mut lines = table.lines();
        let header: Vec<String> = lines
            .next()
            .unwrap()
            .split(',')
            .map(str::to_owned)
            .collect();
        let mut checker = Checker::new(&rules, &header).unwrap_or_else(|err| panic!("{err}"));
        for (i, line) in lines.enumerate() {
            let cells: Vec<Option<&str>> =
                line.split(',').map(|c| (c != "~").then_some(c)).collect();
            let pos = i as u64 + 1;
            checker.push_row(pos, &pos.to_string(), &cells);
        }
        checker.finish()
    }

    /// `(id, violations)` of every rule, in report order.
    fn counts(report: &CheckReport) -> Vec<(&str, u64)> {
        report
            .rules
            .iter()
            .map(|r| (r.id.as_str(), r.violations))
            .collect()
    }

    /// The positions and messages of one rule's examples.
    fn examples<'a>(report: &'a CheckReport, id: &str) -> Vec<(u64, &'a str)> {
        let rule = report
            .rules
            .iter()
            .find(|r| r.id == id)
            .expect("rule is reported");
        rule.examples
            .iter()
            .map(|v| (v.pos, v.message.as_str()))
            .collect()
    }

    #[test]
    fn type_rules_pass_and_fail() {
        let rules = "[columns.n]\ntype = \"integer\"\n[columns.x]\ntype = \"decimal\"\n\
                     [columns.d]\ntype = \"date\"\n[columns.b]\ntype = \"boolean\"\n\
                     [columns.t]\ntype = \"text\"\n";
        let clean = run(
            rules,
            // 13/01/2024 names one day, so a date rule takes it as the profile does.
            "n,x,d,b,t\n1,1.5,2024-02-29,Yes,anything\n-3, 2e3 ,13/01/2024,0,~\n",
        );
        assert!(clean.passed());
        assert_eq!(
            counts(&clean),
            [
                ("n.type", 0),
                ("x.type", 0),
                ("d.type", 0),
                ("b.type", 0),
                ("t.type", 0)
            ]
        );
        let dirty = run(
            rules,
            "n,x,d,b,t\n1.0,1;5,2023-02-29,maybe,x\n,NaN,01/02/2024,2,y\n",
        );
        assert!(!dirty.passed());
        assert_eq!(
            counts(&dirty),
            [
                ("n.type", 1),
                ("x.type", 2),
                ("d.type", 2),
                ("b.type", 2),
                ("t.type", 0)
            ]
        );
        assert_eq!(
            examples(&dirty, "n.type"),
            [(1, "\"1.0\" is not an integer")]
        );
        assert_eq!(
            examples(&dirty, "d.type"),
            [
                (
                    1,
                    "\"2023-02-29\" is not a date (yyyy-mm-dd, or d/m/yyyy that reads one way only)"
                ),
                (
                    2,
                    "\"01/02/2024\" is not a date (yyyy-mm-dd, or d/m/yyyy that reads one way only)"
                )
            ]
        );
    }

    #[test]
    fn required_counts_absent_blank_and_coded_cells() {
        let rules = "[columns.v]\nrequired = true\nmissing_codes = [-99, \"n/a\"]\n";
        assert!(run(rules, "v\nAnna\n0\n").passed());
        let report = run(rules, "v\nAnna\n~\n\n  \n-99\n n/a \nNA\n");
        assert_eq!(counts(&report), [("v.required", 5)]);
        assert_eq!(
            examples(&report, "v.required"),
            [
                (2, "the cell is missing"),
                (3, "the cell is blank"),
                (4, "the cell is blank"),
                (5, "the cell holds the missing-value code \"-99\""),
                (6, "the cell holds the missing-value code \"n/a\""),
            ]
        );
        assert_eq!(report.rules[0].examples[0].value, None);
        assert_eq!(report.rules[0].examples[4].value.as_deref(), Some(" n/a "));
    }

    #[test]
    fn unique_reports_both_rows() {
        let rules = "[columns.id]\nunique = true\n";
        assert!(run(rules, "id\nA\nB\n~\n\n").passed());
        let report = run(rules, "id\nA\nB\nA\n~\n~\nB \nA\n");
        assert_eq!(counts(&report), [("id.unique", 3)]);
        let found: Vec<_> = report.rules[0]
            .examples
            .iter()
            .map(|v| (v.pos, v.other_pos))
            .collect();
        assert_eq!(found, [(3, Some(1)), (6, Some(2)), (7, Some(1))]);
        assert_eq!(
            report.rules[0].examples[0].message,
            "\"A\" also at position 1"
        );
    }

    #[test]
    fn levels_are_exact_text() {
        let rules = "[columns.w]\nlevels = [\"sunny\", \"rain\"]\n[columns.k]\nlevels = [1, 2]\n";
        assert!(run(rules, "w,k\nsunny,1\n rain ,2\n~,~\n").passed());
        let report = run(rules, "w,k\nSunny,01\nfog,3\n");
        assert_eq!(counts(&report), [("w.levels", 2), ("k.levels", 2)]);
        assert_eq!(
            examples(&report, "w.levels")[0],
            (1, "\"Sunny\" is not an allowed level")
        );
    }

    #[test]
    fn patterns_match_the_whole_value() {
        let rules = "[columns.id]\npattern = 'RM-[0-9]{5}'\n";
        assert!(run(rules, "id\nRM-00001\nRM-12345\n\n").passed());
        let report = run(rules, "id\nRM-0001\nxRM-00001\nRM-000012\n");
        assert_eq!(counts(&report), [("id.pattern", 3)]);
        assert_eq!(
            examples(&report, "id.pattern")[0],
            (1, "\"RM-0001\" does not match RM-[0-9]{5}")
        );
    }

    #[test]
    fn hard_bounds_are_errors_and_soft_bounds_warnings() {
        let rules = "[columns.ph]\nmissing_codes = [-9]\n\
                     hard = { min = 0, max = 14 }\nsoft = { min = 5.5, max = 9.5 }\n";
        let clean = run(rules, "ph\n7\n5.5\n9.5\n-9\nacid\n");
        assert_eq!(counts(&clean), [("ph.hard", 0), ("ph.soft", 0)]);
        let warned = run(rules, "ph\n0\n14\n7\n");
        assert!(warned.passed(), "warnings alone pass");
        assert_eq!(counts(&warned), [("ph.hard", 0), ("ph.soft", 2)]);
        assert_eq!(warned.count(Severity::Warning), 2);
        let failed = run(rules, "ph\n-0.1\n14.01\n70\n");
        assert!(!failed.passed());
        assert_eq!(counts(&failed), [("ph.hard", 3), ("ph.soft", 3)]);
        assert_eq!(
            examples(&failed, "ph.hard"),
            [
                (1, "-0.1 is below the hard minimum 0"),
                (2, "14.01 is above the hard maximum 14"),
                (3, "70 is above the hard maximum 14")
            ]
        );
        assert_eq!(
            examples(&failed, "ph.soft")[0],
            (1, "-0.1 is below the soft minimum 5.5")
        );
        assert_eq!(failed.rules[1].severity, Severity::Warning);
    }

    #[test]
    fn date_bounds_compare_dates() {
        let rules = "[columns.on]\ntype = \"date\"\nhard = { min = \"2012-03-01\" }\n\
                     soft = { max = 2025-12-31 }\n";
        let clean = run(rules, "on\n2012-03-01\n2025-12-31\nnot a date\n");
        assert_eq!(
            counts(&clean),
            [("on.type", 1), ("on.hard", 0), ("on.soft", 0)]
        );
        let report = run(rules, "on\n2012-02-29\n2026-01-01\n");
        assert_eq!(
            counts(&report),
            [("on.type", 0), ("on.hard", 1), ("on.soft", 1)]
        );
        assert_eq!(
            examples(&report, "on.hard"),
            [(1, "2012-02-29 is before the hard minimum 2012-03-01")]
        );
        assert_eq!(
            examples(&report, "on.soft"),
            [(2, "2026-01-01 is after the soft maximum 2025-12-31")]
        );
    }

    #[test]
    fn conditions_with_is_missing_and_is_present() {
        let rules = "[columns.training_done]\ntype = \"boolean\"\n\
                     [[conditions]]\n\
                     when = { column = \"training_done\", test = \"eq\", value = \"no\" }\n\
                     then = { column = \"score\", test = \"is missing\" }\n\
                     [[conditions]]\n\
                     severity = \"warning\"\n\
                     when = { column = \"training_done\", test = \"eq\", value = true }\n\
                     then = { column = \"score\", test = \"is present\" }\n";
        let clean = run(rules, "training_done,score\nno,\nyes,55\nN,~\n~,12\n");
        assert_eq!(
            counts(&clean),
            [("training_done.type", 0), ("when#1", 0), ("when#2", 0)]
        );
        let dirty = run(rules, "training_done,score\nno,55\nyes,\nNo,3\nTRUE, \n");
        assert_eq!(
            counts(&dirty),
            [("training_done.type", 0), ("when#1", 2), ("when#2", 2)]
        );
        assert_eq!(
            examples(&dirty, "when#1"),
            [
                (1, "expected score is missing, found \"55\""),
                (3, "expected score is missing, found \"3\"")
            ]
        );
        assert_eq!(
            examples(&dirty, "when#2")[0],
            (2, "expected score is present, found it missing")
        );
        assert!(!dirty.passed());
        let rule = &dirty.rules[1];
        assert_eq!(
            rule.description,
            "when training_done equals \"no\" then score is missing"
        );
        assert_eq!((rule.line, rule.severity), (3, Severity::Error));
        assert_eq!(dirty.rules[2].severity, Severity::Warning);
    }

    #[test]
    fn conditions_compare_columns_and_lists() {
        let rules = "[[conditions]]\nid = \"after-opening\"\n\
                     when = { column = \"sampled_on\", test = \"is present\" }\n\
                     then = { column = \"sampled_on\", test = \"ge\", value_of = \"opened_on\" }\n\
                     [[conditions]]\n\
                     when = [{ column = \"site\", test = \"in\", value = [\"A\", \"B\"] },\n\
                             { column = \"depth\", test = \"gt\", value = 2 }]\n\
                     then = [{ column = \"depth\", test = \"lt\", value = 10 },\n\
                             { column = \"weather\", test = \"ne\", value = \"storm\" }]\n";
        let table = "site,opened_on,sampled_on,depth,weather\n\
                     A,2016-05-01,2016-05-01,3,rain\n\
                     A,2016-05-01,2016-04-30,1,storm\n\
                     B,2016-05-01,2017-01-01,12,sun\n\
                     C,2016-05-01,,20,storm\n\
                     B,,2010-01-01,3,storm\n\
                     A,2016-05-01,2020-01-01,10.0,sun\n\
                     A,2016-05-01,2020-01-01,deep,storm\n";
        let report = run(rules, table);
        assert_eq!(counts(&report), [("after-opening", 1), ("when#2", 3)]);
        assert_eq!(
            examples(&report, "after-opening"),
            [(
                2,
                "expected sampled_on at least opened_on (\"2016-05-01\"), found \"2016-04-30\""
            )]
        );
        assert_eq!(
            examples(&report, "when#2"),
            [
                (3, "expected depth below 10, found \"12\""),
                (5, "expected weather not \"storm\", found \"storm\""),
                (6, "expected depth below 10, found \"10.0\""),
            ]
        );
        assert_eq!(
            report.rules[1].examples[1].column.as_deref(),
            Some("weather")
        );
    }

    #[test]
    fn counts_are_exact_when_examples_are_capped() {
        let rules = "[columns.x]\nhard = { max = 0 }\n";
        let table: String = std::iter::once("x".to_owned())
            .chain((1..=250).map(|i| i.to_string()))
            .collect::<Vec<_>>()
            .join("\n");
        let report = run(rules, &table);
        assert_eq!(report.n_rows, 250);
        assert_eq!(report.rules[0].violations, 250);
        assert_eq!(report.rules[0].examples.len(), MAX_EXAMPLES);
        assert_eq!(
            report.rules[0].examples.last().map(|v| v.pos),
            Some(MAX_EXAMPLES as u64)
        );
    }

    #[test]
    fn rules_naming_unknown_columns_are_refused() {
        let header = ["site".to_owned(), "ph".to_owned()];
        let check = |rules: &str, expected: &str| {
            let rules = RuleSet::parse(rules).unwrap();
            let err = Checker::new(&rules, &header).unwrap_err();
            assert_eq!(err.to_string(), expected);
        };
        check(
            "\n[columns.pH]\ntype = \"decimal\"\n",
            "line 2, key columns.pH: column `pH` is not in the table header",
        );
        check(
            "[[conditions]]\nwhen = { column = \"site\", test = \"is present\" }\n\
             then = { column = \"ph\", test = \"ge\", value_of = \"ph_min\" }\n",
            "line 3, key conditions[1].then.value_of: column `ph_min` is not in the table header",
        );
        check(
            "[[conditions]]\nwhen = [{ column = \"site\", test = \"is present\" },\n\
             { column = \"Site\", test = \"is present\" }]\n\
             then = { column = \"ph\", test = \"is present\" }\n",
            "line 3, key conditions[1].when[2].column: column `Site` is not in the table header",
        );
        let twice = ["ph".to_owned(), "ph".to_owned()];
        let rules = RuleSet::parse("[columns.ph]\n").unwrap();
        let err = Checker::new(&rules, &twice).unwrap_err();
        assert_eq!(
            err.message,
            "column `ph` appears more than once in the table header"
        );
    }

    #[test]
    fn flags_mark_mostly_missing_and_near_constant_columns() {
        let rules = "[flags]\nmostly_missing = 0.5\nnear_constant = 0.75\n\
                     [columns.b]\nmissing_codes = [-9]\n";
        let report = run(rules, "a,b,c\n1,-9,x\n2,,x\n3,7,x\n4,~,y\n");
        let flags: Vec<_> = report
            .flags
            .iter()
            .map(|f| {
                (
                    f.column.as_str(),
                    f.kind,
                    f.share,
                    f.value.as_deref(),
                    f.exact,
                )
            })
            .collect();
        assert_eq!(
            flags,
            [
                ("b", FlagKind::MostlyMissing, 0.75, None, true),
                ("b", FlagKind::NearConstant, 1.0, Some("7"), true),
                ("c", FlagKind::NearConstant, 0.75, Some("x"), true),
            ]
        );
        assert!(report.passed(), "flags are warnings");
        assert_eq!(report.flags[0].line, 2);
        assert!(run("", "a\n1\n").flags.is_empty());
    }

    #[test]
    fn near_constant_stays_a_lower_bound_past_the_tracked_values() {
        let rules = "[flags]\nnear_constant = 0.9\n";
        let mut table = String::from("v");
        for i in 0..20_000 {
            table.push('\n');
            table.push_str(&if i % 20 == 0 {
                format!("u{i}")
            } else {
                "same".to_owned()
            });
        }
        let report = run(rules, &table);
        let flag = &report.flags[0];
        assert_eq!((flag.value.as_deref(), flag.exact), (Some("same"), false));
        assert!(
            flag.share <= 0.95 && flag.share > 0.94,
            "share {}",
            flag.share
        );
    }

    #[test]
    fn the_documented_example_checks_a_river_table() {
        let doc = include_str!("../../docs/rules.md");
        let blocks: Vec<&str> = doc
            .split("```toml\n")
            .skip(1)
            .map(|b| b.split("```").next().unwrap())
            .collect();
        assert_eq!(blocks.len(), 2);
        for block in &blocks {
            RuleSet::parse(block).unwrap_or_else(|err| panic!("{err}"));
        }
        let table = "sample_id,site,sampled_on,volunteer,water_temp_c,ph,turbidity_ntu,weather,training_done,score\n\
                     RM-00001,Mill Creek,2019-06-02,Ada,14.5,7.1,3.2,sunny,yes,82\n\
                     RM-00002,Otter Bend,2019-06-02,Ben,-99,-9,12,cloudy,no,\n\
                     RM-00003,Stone Weir,2015-01-10,Cy,2,15.3,-1,snow,no,40\n\
                     RM-00003,Mill creek,2019-02-30,,9,6.8,4,Snow,maybe,101\n";
        let report = run(blocks[0], table);
        let broken: Vec<_> = counts(&report)
            .into_iter()
            .filter(|(_, n)| *n > 0)
            .collect();
        assert_eq!(
            broken,
            [
                ("sample_id.unique", 1),
                ("site.levels", 1),
                ("sampled_on.type", 1),
                ("volunteer.required", 1),
                ("ph.hard", 1),
                ("ph.soft", 1),
                ("turbidity_ntu.hard", 1),
                ("weather.levels", 1),
                ("training_done.type", 1),
                ("score.hard", 1),
                ("score-needs-training", 1),
                ("when#4", 1),
            ]
        );
        assert!(!report.passed());
    }

    #[test]
    fn reports_serialise_to_json() {
        let report = run("[columns.x]\nsoft = { max = 1 }\n", "x\n2\n");
        let json = serde_json::to_value(&report).unwrap();
        assert_eq!(json["n_rows"], 1);
        assert_eq!(json["rules"][0]["id"], "x.soft");
        assert_eq!(json["rules"][0]["severity"], "warning");
        assert_eq!(json["rules"][0]["examples"][0]["value"], "2");
        assert_eq!(json["rules"][0]["examples"][0]["row"], "1");
    }

    /// Checks one cell of column `x` against `bounds` (a TOML inline table body) and
    /// returns the number of `x.hard` violations.
    fn hard_violations(bounds: &str, cell: &str) -> u64 {
        let report = run(
            &format!("[columns.x]\nhard = {{ {bounds} }}\n"),
            &format!("x\n{cell}\n"),
        );
        report.rules[0].violations
    }

    /// A bound written as TOML: `min = -3.5`.
    fn bound_text(key: &str, bound: Option<String>) -> Option<String> {
        bound.map(|b| format!("{key} = {b}"))
    }

    proptest::proptest! {
        #[test]
        fn number_bounds_agree_with_a_plain_comparison(
            min in proptest::option::of(-1e6..1e6f64),
            max in proptest::option::of(-1e6..1e6f64),
            raw in -2e6..2e6f64,
            pick in 0..3u8,
        ) {
            proptest::prop_assume!(min.is_some() || max.is_some());
            proptest::prop_assume!(!matches!((min, max), (Some(lo), Some(hi)) if lo > hi));
            // Land on the bounds a third of the time each, to test that they are inclusive.
            let x = match pick {
                0 => min.unwrap_or(raw),
                1 => max.unwrap_or(raw),
                _ => raw,
            };
            let expected = min.is_some_and(|lo| x < lo) || max.is_some_and(|hi| x > hi);
            let bounds: Vec<String> = [
                bound_text("min", min.map(|b| format!("{b:?}"))),
                bound_text("max", max.map(|b| format!("{b:?}"))),
            ]
            .into_iter()
            .flatten()
            .collect();
            proptest::prop_assert_eq!(hard_violations(&bounds.join(", "), &x.to_string()), u64::from(expected));
        }

        #[test]
        fn date_bounds_agree_with_a_plain_comparison(
            min in proptest::option::of((1900..2100u16, 1..=12u8, 1..=28u8)),
            max in proptest::option::of((1900..2100u16, 1..=12u8, 1..=28u8)),
            x in (1900..2100u16, 1..=12u8, 1..=31u8),
        ) {
            proptest::prop_assume!(min.is_some() || max.is_some());
            proptest::prop_assume!(!matches!((min, max), (Some(lo), Some(hi)) if lo > hi));
            let text = |(y, m, d): (u16, u8, u8)| format!("{y:04}-{m:02}-{d:02}");
            // A day that does not exist is not a date, so no bound can judge it.
            let real = crate::values::Date::new(x.0, x.1, x.2).is_some();
            let expected = real && (min.is_some_and(|lo| x < lo) || max.is_some_and(|hi| x > hi));
            let bounds: Vec<String> = [
                bound_text("min", min.map(|b| format!("{:?}", text(b)))),
                bound_text("max", max.map(text)),
            ]
            .into_iter()
            .flatten()
            .collect();
            proptest::prop_assert_eq!(hard_violations(&bounds.join(", "), &text(x)), u64::from(expected));
        }
    }
}
