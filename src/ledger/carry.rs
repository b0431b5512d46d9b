//! Carrying the decisions made on one extract forward to the next.
//!
//! Each fix made on the previous extract is replayed against the newest one and gets an
//! outcome: *applied* (the row is there and the cell still holds the value the fix replaced),
//! *fixed at source* (the new extract already holds the fixed value), *conflict* (the source
//! changed to something else: not applied, listed for a decision) or *row gone*. Value-level
//! fixes (`recode`, `missing`) are re-evaluated on the new extract, so new rows with the same
//! problem are fixed too. Applied fixes are staged as pending, each naming the commits it came
//! from, so `why` can show the chain of origins.

use super::apply::{FixApplier, RuleBook};
use crate::error::{Error, Result};
use crate::model::edit::Rows;
use crate::model::{Change, Fix, FixAction, Origin, RowId};
use crate::query::{Version, align_positions, decode};
use crate::store::Store;
use std::collections::{HashMap, HashSet};
use std::ops::ControlFlow;

/// What happened to one carried fix (or one of its cells).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Outcome {
    /// Staged against the new extract.
    Applied,
    /// The new extract already holds the fixed value; nothing to do.
    FixedAtSource,
    /// The source value changed to something else: not applied, needs a decision.
    Conflict,
    /// The row is not in the new extract.
    RowGone,
    /// The column is not in the new extract.
    ColumnGone,
    /// Carried onto this extract before, by the commit named (or still pending or open).
    AlreadyCarried(Option<u64>),
    /// A cell of a fix that is evaluated afresh on each extract (recode, missing, a condition,
    /// a rule, duplicates) now holds another value: the fix decides anew, nothing is owed.
    ChangedAtSource,
}

impl Outcome {
    /// Lowercase words for people.
    pub fn label(&self) -> &'static str {
        match self {
            Outcome::Applied => "applied",
            Outcome::FixedAtSource => "fixed at source",
            Outcome::Conflict => "conflict",
            Outcome::RowGone => "row gone",
            Outcome::ColumnGone => "column gone",
            Outcome::AlreadyCarried(_) => "already carried",
            Outcome::ChangedAtSource => "changed at source",
        }
    }
}

/// One cell of a carried fix that needs a look (a conflict), or its outcome.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CellOutcome {
    /// Row.
    pub row: RowId,
    /// Column.
    pub column: String,
    /// The value the fix replaced on the previous extract.
    pub was: Option<String>,
    /// The value the fix set.
    pub fixed: Option<String>,
    /// The value in the new extract now.
    pub now: Option<String>,
    /// What happened.
    pub outcome: Outcome,
}

/// One fix carried (or not) to the new extract.
#[derive(Debug, Clone)]
pub struct Carried {
    /// The fix as staged (with its origins).
    pub fix: Fix,
    /// The fix's overall outcome.
    pub outcome: Outcome,
    /// Per-cell outcomes for the cells it changed on the previous extract.
    pub cells: Vec<CellOutcome>,
    /// Cells a value-level fix matches in the new extract (new rows included).
    pub matches_now: u64,
    /// Of those, cells in rows the original fix did not touch (new rows, new misspellings).
    pub new_matches: u64,
}

impl Carried {
    /// Cells per outcome.
    pub fn count(&self, o: Outcome) -> usize {
        self.cells.iter().filter(|c| c.outcome == o).count()
    }

    /// One line for `status`.
    pub fn note(&self) -> String {
        match self.outcome {
            Outcome::AlreadyCarried(Some(seq)) => {
                return format!("carried before, in commit {seq}");
            }
            Outcome::AlreadyCarried(None) => return "carried before: an open conflict".into(),
            _ => {}
        }
        let mut parts = vec![format!("carried: {}", self.outcome.label())];
        for o in [
            Outcome::Applied,
            Outcome::FixedAtSource,
            Outcome::Conflict,
            Outcome::RowGone,
        ] {
            let n = self.count(o);
            if n > 0 {
                parts.push(format!(
                    "{} {}",
                    crate::model::quantity(n as u64, "cell", "cells"),
                    o.label()
                ));
            }
        }
        if matches!(
            self.fix.action,
            FixAction::Recode { .. } | FixAction::Missing { .. }
        ) {
            parts.push(format!(
                "{} now, {} of them new",
                crate::model::quantity(self.matches_now, "cell matches", "cells match"),
                self.new_matches
            ));
        }
        parts.join("; ")
    }
}

/// How a fix chooses its rows, for fixes that do.
/// Replay the fixes made on `table`'s previous extract (up to `from`, default the last commit
/// before the newest extract) against the newest extract, and stage the applicable ones.
pub fn carry(
    store: &mut Store,
    table: &str,
    from: Option<&str>,
    now: &str,
    by: Option<&crate::model::Recorder>,
) -> Result<Vec<Carried>> {
    let tx = store.transaction()?;
    let reader = tx.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let extracts = reader.extracts_of(table)?;
    let Some(&(new_seq, _)) = extracts.last() else {
        return Err(Error::UnknownTable(table.to_string()));
    };
    if extracts.len() < 2 {
        return Err(Error::Invalid(format!(
            "table '{table}' has only one extract; carry replays fixes onto a newer extract after 'emend ingest'"
        )));
    }
    if reader.pending()?.iter().any(|p| p.fix.table == table) {
        return Err(Error::PendingFixes {
            table: table.to_string(),
            action: "carrying",
        });
    }
    let upto = match from {
        Some(text) => {
            let rev = crate::query::resolve(&reader, text)?;
            if rev.raw || rev.seq >= new_seq {
                return Err(Error::Invalid(format!(
                    "--from must name a commit before the newest extract (commit {new_seq})"
                )));
            }
            rev.seq
        }
        None => new_seq - 1,
    };
    let (prev_seq, _) = reader.extract_at(table, upto)?.ok_or_else(|| {
        Error::Invalid(format!("table '{table}' had no extract at commit {upto}"))
    })?;

    // Fixes withdrawn by `upto` are not carried, and neither are the withdrawals.
    let withdrawn = crate::query::withdrawn_fixes(&reader, prev_seq, upto)?;
    // What was carried onto the newest extract already: (origin seq, fix index) → the commit
    // that signed it (None while it is an open conflict). A second carry changes nothing.
    let mut carried_before: HashMap<(u64, u64), Option<u64>> = HashMap::new();
    for seq in new_seq + 1..=head {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        if let Change::Fixes(list) = decode(&stored)?.change {
            for r in list.iter().filter(|r| r.fix.table == table) {
                if let Some(o) = r.fix.origins.last() {
                    carried_before
                        .entry((o.seq, o.fix_idx))
                        .or_insert(Some(seq));
                }
            }
        }
    }
    for c in reader
        .conflicts()?
        .iter()
        .filter(|c| c.conflict.fix.table == table)
    {
        if let Some(o) = c.conflict.fix.origins.last() {
            carried_before.entry((o.seq, o.fix_idx)).or_insert(None);
        }
    }
    let mut skipped: Vec<Carried> = Vec::new();
    // The fixes to carry, in order, with where they came from.
    let mut fixes: Vec<(Fix, Vec<crate::model::CellEdit>)> = Vec::new();
    for seq in prev_seq + 1..=upto {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        if let Change::Fixes(list) = decode(&stored)?.change {
            for (i, r) in list.into_iter().enumerate() {
                // Rules are not carried: they apply to every later version until replaced.
                if r.fix.table != table
                    || matches!(
                        r.fix.action,
                        FixAction::Rules { .. } | FixAction::Withdraw { .. }
                    )
                    || withdrawn.contains(&(seq, i as u64 + 1))
                {
                    continue;
                }
                let mut fix = r.fix;
                fix.origins.push(Origin {
                    seq,
                    id: stored.id,
                    fix_idx: i as u64,
                });
                if let Some(&when) = carried_before.get(&(seq, i as u64)) {
                    skipped.push(Carried {
                        fix,
                        outcome: Outcome::AlreadyCarried(when),
                        cells: Vec::new(),
                        matches_now: 0,
                        new_matches: 0,
                    });
                    continue;
                }
                fixes.push((fix, r.edits));
            }
        }
    }

    let mut out = replay(&reader, table, fixes, prev_seq, new_seq, head)?;
    stage(&tx, &out, now, by, |c| c.note())?;
    tx.commit()?;
    out.extend(skipped);
    out.sort_by_key(|c| c.fix.origins.last().map(|o| (o.seq, o.fix_idx)));
    Ok(out)
}

/// Replay `fixes`, made on the extract of `table` ingested by commit `prev_seq`, against the
/// version of `table` at `head`, whose extract commit `new_seq` ingested (the same one when
/// `prev_seq == new_seq`): each gets an outcome, and those that apply are ready to stage.
/// Nothing is written. `carry` replays a previous extract's fixes; a team store's `receive`
/// replays unpublished fixes onto the team's head.
pub(crate) fn replay(
    reader: &crate::store::Reader<'_>,
    table: &str,
    fixes: Vec<(Fix, Vec<crate::model::CellEdit>)>,
    prev_seq: u64,
    new_seq: u64,
    head: u64,
) -> Result<Vec<Carried>> {
    let new_version = Version::load(reader, table, head, false)?;
    let keyless = new_version.def.key.is_empty();
    // For tables without a key, old positions map to new ones through the row alignment (on
    // the same extract they are the same).
    let position_map = if keyless && prev_seq != new_seq {
        let old_raw = Version::load(reader, table, prev_seq, true)?;
        let new_raw = Version::load(reader, table, new_seq, true)?;
        Some(align_positions(reader, &old_raw, &new_raw)?)
    } else {
        None
    };
    let map_row = |row: &RowId| -> Option<RowId> {
        match &position_map {
            None => Some(row.clone()),
            Some(m) => row
                .as_str()
                .parse::<u64>()
                .ok()
                .and_then(|p| m.get(&p))
                .map(|p| RowId::from_position(*p)),
        }
    };

    // One pass over the new version: the cells every fix needs, and value-level matches.
    let mut wanted: HashSet<String> = HashSet::new();
    for (fix, edits) in &fixes {
        for e in edits {
            if let Some(r) = map_row(&e.row) {
                wanted.insert(r.0);
            }
        }
        if let FixAction::Exclude { row } | FixAction::Set { row, .. } = &fix.action
            && let Some(r) = map_row(row)
        {
            wanted.insert(r.0);
        }
        if let Some(Rows::Listed(list)) = fix.action.rows() {
            wanted.extend(list.iter().filter_map(map_row).map(|r| r.0));
        }
    }
    let col_of = |c: &str| new_version.col_idx(c).ok();
    // Per fix: how it applies in the new extract (its column there, the values it looks for).
    let header = new_version.header().to_vec();
    let book = RuleBook::load(reader, fixes.iter().map(|(fix, _)| fix))?;
    let mut appliers: Vec<FixApplier<'_>> = fixes
        .iter()
        .map(|(fix, _)| FixApplier::lenient(fix, &header, &book))
        .collect();
    let mut rows: HashMap<String, Vec<Option<String>>> = HashMap::new();
    // Per value-level fix: (cells matching now, rows matching now).
    let mut matches: Vec<(u64, HashSet<String>)> = vec![(0, HashSet::new()); fixes.len()];
    new_version.for_each_row(reader, |r| {
        if wanted.contains(r.id.as_str()) {
            rows.insert(r.id.0.clone(), r.cells.to_vec());
        }
        for (k, applier) in appliers.iter_mut().enumerate() {
            if applier.matches(r.id, r.cells) {
                matches[k].0 += 1;
                matches[k].1.insert(r.id.0.clone());
            }
        }
        Ok(ControlFlow::Continue(()))
    })?;

    let rows_seen = &rows;
    let mut out = Vec::new();
    for (k, (mut fix, edits)) in fixes.into_iter().enumerate() {
        if let Some(col) = fix.action.column()
            && col_of(col).is_none()
        {
            out.push(Carried {
                fix,
                outcome: Outcome::ColumnGone,
                cells: Vec::new(),
                matches_now: 0,
                new_matches: 0,
            });
            continue;
        }
        let mut cells = Vec::new();
        let mut touched: HashSet<String> = HashSet::new();
        // Fixes evaluated afresh on each extract owe no decision when a cell changed.
        let afresh = matches!(
            fix.action,
            FixAction::Recode { .. } | FixAction::Missing { .. }
        ) || matches!(
            fix.action.rows(),
            Some(Rows::Where(_) | Rows::Duplicates(_) | Rows::Breaking { .. })
        );
        for e in &edits {
            let mapped = map_row(&e.row);
            let now = mapped
                .as_ref()
                .and_then(|r| rows.get(r.as_str()))
                .and_then(|cells| col_of(&e.column).map(|c| cells[c].clone()));
            let outcome = match (&mapped, &now) {
                (None, _) | (_, None) => Outcome::RowGone,
                (Some(_), Some(v)) if *v == e.new => Outcome::FixedAtSource,
                (Some(_), Some(v)) if *v == e.old => Outcome::Applied,
                _ if afresh => Outcome::ChangedAtSource,
                _ => Outcome::Conflict,
            };
            if let Some(r) = &mapped {
                touched.insert(r.0.clone());
            }
            cells.push(CellOutcome {
                row: mapped.unwrap_or_else(|| e.row.clone()),
                column: e.column.clone(),
                was: e.old.clone(),
                fixed: e.new.clone(),
                now: now.flatten(),
                outcome,
            });
        }
        let (matches_now, new_matches) = (
            matches[k].0,
            matches[k]
                .1
                .iter()
                .filter(|r| !touched.contains(*r))
                .count() as u64,
        );
        let outcome = match &mut fix.action {
            FixAction::Set { row, .. } => match cells.first().map(|c| c.outcome) {
                Some(o) => {
                    if let Some(r) = map_row(row) {
                        *row = r;
                    }
                    o
                }
                // A set that changed nothing on the previous extract: carry it if the row is there.
                None => match map_row(row).filter(|r| rows.contains_key(r.as_str())) {
                    Some(r) => {
                        *row = r;
                        Outcome::Applied
                    }
                    None => Outcome::RowGone,
                },
            },
            FixAction::Exclude { row } => {
                match map_row(row).filter(|r| rows.contains_key(r.as_str())) {
                    Some(r) => {
                        *row = r;
                        Outcome::Applied
                    }
                    None => Outcome::RowGone,
                }
            }
            FixAction::Recode { .. } | FixAction::Missing { .. } => {
                if matches_now > 0 {
                    Outcome::Applied
                } else if cells.is_empty()
                    || cells.iter().any(|c| c.outcome == Outcome::FixedAtSource)
                {
                    Outcome::FixedAtSource
                } else {
                    Outcome::RowGone
                }
            }
            FixAction::Distrust { .. } | FixAction::Rules { .. } | FixAction::Withdraw { .. } => {
                Outcome::Applied
            }
            FixAction::Edit { rows, .. }
            | FixAction::ExcludeRows { rows, .. }
            | FixAction::Keep { rows, .. }
            | FixAction::Note { rows, .. } => match rows {
                // Listed rows follow their rows; rows gone are dropped from the fix.
                Rows::Listed(list) => {
                    // A row whose cell already holds the fixed value is left out: a
                    // transform applied twice (a sign turned back) would undo the fix.
                    let fixed: HashSet<&RowId> = cells
                        .iter()
                        .filter(|c| c.outcome == Outcome::FixedAtSource)
                        .map(|c| &c.row)
                        .collect();
                    let here: Vec<RowId> = list
                        .iter()
                        .filter_map(map_row)
                        .filter(|r| rows_seen.contains_key(r.as_str()) && !fixed.contains(r))
                        .collect();
                    if cells.iter().any(|c| c.outcome == Outcome::Conflict) {
                        // Kept open with its rows in the new extract, to apply if so decided.
                        *list = here;
                        Outcome::Conflict
                    } else if here.is_empty() && !fixed.is_empty() {
                        Outcome::FixedAtSource
                    } else if here.is_empty() {
                        Outcome::RowGone
                    } else {
                        *list = here;
                        Outcome::Applied
                    }
                }
                // A condition or a duplicate search is evaluated afresh on the new extract.
                Rows::Where(_) | Rows::Duplicates(_) | Rows::Breaking { .. } => {
                    if matches_now > 0 {
                        Outcome::Applied
                    } else {
                        Outcome::FixedAtSource
                    }
                }
            },
        };
        // Rows are resolved again when the carried fix is committed.
        if let FixAction::ExcludeRows { resolved, .. }
        | FixAction::Keep { resolved, .. }
        | FixAction::Note { resolved, .. } = &mut fix.action
        {
            resolved.clear();
        }
        out.push(Carried {
            fix,
            outcome,
            cells,
            matches_now,
            new_matches,
        });
    }
    Ok(out)
}

/// Stage what [`replay`] found: applied fixes as pending (with `note` for `status`), conflicts
/// as open decisions.
pub(crate) fn stage(
    tx: &crate::store::WriteTx<'_>,
    out: &[Carried],
    now: &str,
    by: Option<&crate::model::Recorder>,
    note: impl Fn(&Carried) -> String,
) -> Result<()> {
    for c in out {
        match c.outcome {
            Outcome::Applied => {
                tx.add_pending(&c.fix, Some(&note(c)), now, by)?;
            }
            // A conflict is a decision owed: kept open until resolved or deferred.
            Outcome::Conflict => {
                let conflict = crate::model::Conflict {
                    fix: c.fix.clone(),
                    cells: c
                        .cells
                        .iter()
                        .filter(|cell| cell.outcome == Outcome::Conflict)
                        .map(|cell| crate::model::ConflictCell {
                            row: cell.row.clone(),
                            column: cell.column.clone(),
                            was: cell.was.clone(),
                            fixed: cell.fixed.clone(),
                            now: cell.now.clone(),
                        })
                        .collect(),
                };
                tx.add_conflict(&conflict, now)?;
            }
            _ => {}
        }
    }
    Ok(())
}

/// How the reason of a fix that answers a carried conflict begins: the reason is the answer's,
/// given when it was answered, not the carried fix's.
pub const ANSWER_PREFIX: &str = "answer to a carried conflict: ";

/// How the analyst answers a carried conflict.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Resolution {
    /// Apply the carried fix anyway, to the value the new extract holds.
    Apply,
    /// Keep the new extract's value: a signed `keep` of the conflicting cells.
    KeepSource,
    /// Set the conflicting cells to this value (`None`: missing).
    Set(Option<String>),
    /// Decide later: a signed note on the conflicting cells, listed by the report.
    Defer,
}

/// The fix that answers `conflict` in the way `how`, with the reason `why` and the carried
/// fix's origins (so `why` shows where the decision came from).
pub fn answer(conflict: &crate::model::Conflict, how: &Resolution, why: &str) -> Fix {
    let rows: Vec<RowId> = {
        let mut seen = HashSet::new();
        conflict
            .cells
            .iter()
            .filter(|c| seen.insert(c.row.clone()))
            .map(|c| c.row.clone())
            .collect()
    };
    let column = conflict
        .cells
        .first()
        .map(|c| c.column.clone())
        .or_else(|| conflict.fix.action.column().map(str::to_owned))
        .unwrap_or_default();
    let action = match how {
        Resolution::Apply => conflict.fix.action.clone(),
        Resolution::KeepSource => FixAction::Keep {
            column,
            rows: Rows::Listed(rows),
            resolved: Vec::new(),
        },
        Resolution::Set(v) => FixAction::Edit {
            column,
            rows: Rows::Listed(rows),
            transform: crate::model::edit::Transform::Value(v.clone()),
        },
        Resolution::Defer => FixAction::Note {
            column: Some(column),
            rows: Rows::Listed(rows),
            resolved: Vec::new(),
        },
    };
    let why = match how {
        Resolution::Defer => format!(
            "carried conflict left open ({}): {why}",
            conflict.fix.action.describe()
        ),
        _ => format!("{ANSWER_PREFIX}{}", why.trim()),
    };
    Fix {
        table: conflict.fix.table.clone(),
        action,
        why,
        evidence: Vec::new(),
        consulted: None,
        origins: conflict.fix.origins.clone(),
    }
}

/// Answer open conflict number `n` (as `status` numbers them; a conflict keeps its number
/// while others are answered): records the answering fix as pending and closes the conflict
/// (discarding that fix opens it again, under a new number).
pub fn resolve_conflict(
    store: &mut Store,
    n: usize,
    how: Resolution,
    why: &str,
    now: &str,
    by: Option<&crate::model::Recorder>,
    despite: Option<&str>,
) -> Result<Fix> {
    if why.trim().is_empty() {
        return Err(Error::EmptyReason);
    }
    let tx = store.transaction()?;
    let open = tx.read().conflicts()?;
    let Some(c) = open.iter().find(|c| c.id == n as i64) else {
        let numbers: Vec<String> = open.iter().map(|c| c.id.to_string()).collect();
        return Err(Error::Invalid(if numbers.is_empty() {
            format!("there is no open conflict {n}: none is open")
        } else {
            format!(
                "there is no open conflict {n}: the open ones are {} ('emend status' lists them)",
                numbers.join(", ")
            )
        }));
    };
    let mut fix = answer(&c.conflict, &how, why);
    // A value set by hand meets the rules in force, as `set` does.
    if let Resolution::Set(Some(v)) = &how
        && let Some(column) = fix.action.column().map(str::to_owned)
    {
        let reader = tx.read();
        let head = reader.head()?.map_or(0, |(s, _)| s);
        if let Some((_, name, text)) = crate::query::rules_at(&reader, &fix.table, head)? {
            let rules = crate::checks::RuleSet::parse(&text).map_err(|e| {
                Error::Corrupt(format!("stored rules file {name} does not parse: {e}"))
            })?;
            if let Some((rule, wrong)) = rules.breaks(&column, v) {
                if despite != Some(rule.as_str()) {
                    return Err(Error::Invalid(format!(
                        "{wrong}: the value breaks rule {rule} of {name}; give --despite {rule} to set it on purpose"
                    )));
                }
                fix.why = format!("{} [despite rule {rule}]", fix.why);
            }
        }
    }
    let note = format!(
        "answers a carried conflict: {}",
        c.conflict.fix.action.describe()
    );
    tx.add_pending_resolving(&fix, Some(&note), now, by, Some(&c.conflict))?;
    tx.drop_conflict(c.id)?;
    tx.commit()?;
    Ok(fix)
}
