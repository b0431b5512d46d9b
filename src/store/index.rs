//! The index rows derived from commit bodies: extracts, marks (exclusions, distrust, kept values,
//! notes, withdrawals), table versions and tags, as written with each commit and as `verify`
//! recomputes them from the bodies. Cell edits have no index rows: the signed bodies, whose
//! cells are packed, are read for them (`Reader::cell_edits`).

use crate::model::{Change, CommitBody};

/// One cell edit as readers get it: from the fix record of a signed body.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct CellEditRow {
    /// Table.
    pub table: String,
    /// Row.
    pub row: String,
    /// Column.
    pub column: String,
    /// Commit sequence.
    pub seq: u64,
    /// Index of the fix within the commit.
    pub fix_idx: u64,
    /// Value before.
    pub old: Option<String>,
    /// Value after.
    pub new: Option<String>,
}

/// One row of the mark index (exclusions and distrust).
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct MarkRow {
    /// Table.
    pub table: String,
    /// `exclude` or `distrust`.
    pub kind: String,
    /// Row id or column name.
    pub target: String,
    /// Commit sequence.
    pub seq: u64,
    /// Index of the fix within the commit.
    pub fix_idx: u64,
}

/// Every derived index row, for comparison by `verify`.
#[derive(Debug, Default, PartialEq, Eq)]
pub struct IndexRows {
    /// extract_index rows: (table, seq, extract).
    pub extracts: Vec<(String, u64, [u8; 32])>,
    /// mark rows.
    pub marks: Vec<MarkRow>,
    /// version_index rows: (table, seq, hash, n_rows).
    pub versions: Vec<(String, u64, [u8; 32], u64)>,
    /// tag rows: (name, tag commit seq, target seq).
    pub tags: Vec<(String, u64, u64)>,
}

impl IndexRows {
    /// The rows a commit body implies.
    pub fn from_body(body: &CommitBody) -> Self {
        let mut out = IndexRows::default();
        out.add_body(body);
        out
    }

    /// Add the rows a commit body implies.
    pub fn add_body(&mut self, body: &CommitBody) {
        let seq = body.seq;
        match &body.change {
            Change::Tag(_) | Change::Trust(_) | Change::Revoke(_) => {}
            Change::Ingest(r) => {
                self.extracts
                    .push((r.table.clone(), seq, *r.extract.as_bytes()));
            }
            Change::Fixes(records) => {
                for (fix_idx, rec) in records.iter().enumerate() {
                    let table = &rec.fix.table;
                    // Fixes that choose rows mark each row they chose (a kept value or a note
                    // on a cell marks the cell: row, separator, column).
                    let chosen = match &rec.fix.action {
                        crate::model::FixAction::ExcludeRows { resolved, .. } => {
                            Some(("exclude", resolved, None))
                        }
                        crate::model::FixAction::Keep {
                            resolved, column, ..
                        } => Some(("keep", resolved, Some(column.as_str()))),
                        crate::model::FixAction::Note {
                            resolved, column, ..
                        } => Some(("note", resolved, column.as_deref())),
                        _ => None,
                    };
                    if let Some((kind, rows, column)) = chosen {
                        for row in rows {
                            let target = match column {
                                Some(c) => crate::model::cell_target(&row.0, c),
                                None => row.0.clone(),
                            };
                            self.marks.push(MarkRow {
                                table: table.clone(),
                                kind: kind.into(),
                                target,
                                seq,
                                fix_idx: fix_idx as u64,
                            });
                        }
                    }
                    let mark = match &rec.fix.action {
                        crate::model::FixAction::Exclude { row } => {
                            Some(("exclude", row.0.clone()))
                        }
                        crate::model::FixAction::Distrust { column } => {
                            Some(("distrust", column.clone()))
                        }
                        crate::model::FixAction::Withdraw { seq, fix } => {
                            Some(("withdraw", format!("{seq}.{fix}")))
                        }
                        _ => None,
                    };
                    if let Some((kind, target)) = mark {
                        self.marks.push(MarkRow {
                            table: table.clone(),
                            kind: kind.into(),
                            target,
                            seq,
                            fix_idx: fix_idx as u64,
                        });
                    }
                }
            }
        }
        if let Change::Tag(t) = &body.change {
            self.tags.push((t.name.clone(), seq, t.target_seq));
        }
        for v in &body.versions {
            self.versions
                .push((v.table.clone(), seq, *v.hash.as_bytes(), v.n_rows));
        }
    }

    /// Sort every list, so two sets of rows compare equal regardless of order.
    pub fn sort(&mut self) {
        self.extracts.sort();
        self.marks.sort();
        self.versions.sort();
        self.tags.sort();
    }
}
