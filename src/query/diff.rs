//! Differences between two versions of a table.
//!
//! Between versions built on the same extract the diff reads only the cell-edit and mark
//! indexes for the commits in between: its cost grows with the number of edits, not with the
//! table. Between versions built on different extracts it streams both: rows are matched by
//! key, or, for tables without a key, aligned with a sequence diff over row hashes so that
//! rows inserted or deleted in the middle do not make every later row look changed.

use super::commits::{decode, ingest_record};
use super::rev::Rev;
use super::version::Version;
use crate::error::{Error, Result};
use crate::hash::CommitId;
use crate::model::{Change, RowId};
use crate::store::Reader;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::hash::{BuildHasher, Hasher};
use std::ops::ControlFlow;

/// The fix that made a change.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FixRef {
    /// Commit sequence.
    pub seq: u64,
    /// Commit id.
    pub id: CommitId,
    /// Kind of fix (`set`, `recode`, ...).
    pub kind: String,
    /// The reason given.
    pub why: String,
}

/// One changed cell.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CellChange {
    /// The row (for tables without a key, its position in the newer version).
    pub row: RowId,
    /// Where the row was in the older version, when that differs (tables without a key).
    pub old_row: Option<RowId>,
    /// Column.
    pub column: String,
    /// Value in FROM.
    pub old: Option<String>,
    /// Value in TO.
    pub new: Option<String>,
    /// The fix that set the TO value, for changes made by fixes.
    pub by: Option<FixRef>,
}

/// A row only one side has.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowChange {
    /// The row.
    pub row: RowId,
    /// Its cells, in that side's header order.
    pub cells: Vec<Option<String>>,
}

/// A row exclusion or column distrust that differs between the two versions.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct MarkChange {
    /// Row id or column name.
    pub target: String,
    /// Whether the mark is set in TO (false: it was set in FROM and is not in TO).
    pub set_in_to: bool,
    /// The fix that set it, when known.
    pub by: Option<FixRef>,
}

/// Everything that differs between two versions of a table.
#[derive(Debug, Clone, Default)]
pub struct Diff {
    /// Table.
    pub table: String,
    /// FROM's commit (for `raw`, the ingest commit of its extract).
    pub from_seq: u64,
    /// TO's commit.
    pub to_seq: u64,
    /// The two versions are built on different extracts.
    pub across_extracts: bool,
    /// Columns only TO has.
    pub columns_added: Vec<String>,
    /// Columns only FROM has.
    pub columns_removed: Vec<String>,
    /// Changed cells.
    pub cells: Vec<CellChange>,
    /// Rows only TO has.
    pub rows_added: Vec<RowChange>,
    /// Rows only FROM has.
    pub rows_removed: Vec<RowChange>,
    /// Rows whose exclusion differs.
    pub rows_excluded: Vec<MarkChange>,
    /// Columns whose distrust differs.
    pub columns_distrusted: Vec<MarkChange>,
    /// Header of TO.
    pub to_header: Vec<String>,
    /// Header of FROM.
    pub from_header: Vec<String>,
    /// How many index rows were read (same-extract diffs) — the measure of its cost.
    pub index_rows_read: u64,
    /// Rows streamed from extracts (cross-extract diffs).
    pub rows_streamed: u64,
}

impl Diff {
    /// Whether nothing differs.
    pub fn is_empty(&self) -> bool {
        self.columns_added.is_empty()
            && self.columns_removed.is_empty()
            && self.cells.is_empty()
            && self.rows_added.is_empty()
            && self.rows_removed.is_empty()
            && self.rows_excluded.is_empty()
            && self.columns_distrusted.is_empty()
    }

    /// Changed cells per column, in TO's header order: (column, count).
    pub fn stat(&self) -> Vec<(String, u64)> {
        let mut counts: HashMap<&str, u64> = HashMap::new();
        for c in &self.cells {
            *counts.entry(&c.column).or_default() += 1;
        }
        let mut out: Vec<(String, u64)> = self
            .to_header
            .iter()
            .chain(self.from_header.iter())
            .filter_map(|h| counts.remove(h.as_str()).map(|n| (h.clone(), n)))
            .collect();
        out.retain(|(_, n)| *n > 0);
        out
    }
}

/// A commit's id and its fixes' (kind, reason).
type CommitFixes = (CommitId, Vec<(String, String)>);

/// Two versions of one row whose hashes differ: (row, old row, old cells, new cells, old
/// excluded, new excluded).
type RowPair = (
    RowId,
    Option<RowId>,
    Vec<Option<String>>,
    Vec<Option<String>>,
    bool,
    bool,
);

/// Reads fix reasons from commit bodies, decoding each commit once.
struct FixLookup<'r, 'a> {
    reader: &'r Reader<'a>,
    cache: HashMap<u64, Option<CommitFixes>>,
}

impl<'r, 'a> FixLookup<'r, 'a> {
    fn new(reader: &'r Reader<'a>) -> Self {
        FixLookup {
            reader,
            cache: HashMap::new(),
        }
    }

    fn get(&mut self, seq: u64, fix_idx: u64) -> Result<Option<FixRef>> {
        if !self.cache.contains_key(&seq) {
            let entry = match self.reader.try_commit(seq)? {
                Some(stored) => match decode(&stored)?.change {
                    Change::Fixes(list) => Some((
                        stored.id,
                        list.into_iter()
                            .map(|r| (r.fix.action.kind().to_string(), r.fix.why))
                            .collect(),
                    )),
                    _ => None,
                },
                None => None,
            };
            self.cache.insert(seq, entry);
        }
        Ok(self.cache[&seq].as_ref().and_then(|(id, fixes)| {
            fixes.get(fix_idx as usize).map(|(kind, why)| FixRef {
                seq,
                id: *id,
                kind: kind.clone(),
                why: why.clone(),
            })
        }))
    }
}

/// The commit a revision stands for when diffing: `raw` is its extract's ingest commit.
fn effective_seq(reader: &Reader<'_>, table: &str, rev: Rev) -> Result<(u64, u64)> {
    let (ingest_seq, _) = reader
        .extract_at(table, rev.seq)?
        .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
    Ok((if rev.raw { ingest_seq } else { rev.seq }, ingest_seq))
}

/// Diff two versions of `table`.
pub fn diff(reader: &Reader<'_>, table: &str, from: Rev, to: Rev) -> Result<Diff> {
    let (from_seq, from_ingest) = effective_seq(reader, table, from)?;
    let (to_seq, to_ingest) = effective_seq(reader, table, to)?;
    if from_ingest == to_ingest {
        same_extract(reader, table, from_seq, to_seq, from_ingest)
    } else {
        let from_v = Version::load(reader, table, from_seq, false)?;
        let to_v = Version::load(reader, table, to_seq, false)?;
        across_extracts(reader, &from_v, &to_v)
    }
}

fn row_order_key(row: &str, keyless: bool) -> (u64, String) {
    if keyless {
        (row.parse().unwrap_or(u64::MAX), String::new())
    } else {
        (0, row.to_string())
    }
}

fn same_extract(reader: &Reader<'_>, table: &str, from: u64, to: u64, ingest: u64) -> Result<Diff> {
    let (lo, hi) = (from.min(to), from.max(to));
    let reversed = from > to;
    let def = ingest_record(reader, ingest)?;
    let keyless = def.key.is_empty();
    let mut out = Diff {
        table: table.to_string(),
        from_seq: from,
        to_seq: to,
        to_header: def.header.clone(),
        from_header: def.header.clone(),
        ..Diff::default()
    };
    let edits = reader.cell_edits(table, lo, hi)?;
    out.index_rows_read = edits.len() as u64;
    // Per cell: the value before the first edit in range, after the last, and who set it.
    struct Net {
        first_old: Option<String>,
        last_new: Option<String>,
        seq: u64,
        fix_idx: u64,
    }
    let mut net: BTreeMap<((u64, String), String, String), Net> = BTreeMap::new();
    for e in edits {
        let key = (
            row_order_key(&e.row, keyless),
            e.row.clone(),
            e.column.clone(),
        );
        match net.get_mut(&key) {
            Some(n) => {
                n.last_new = e.new;
                n.seq = e.seq;
                n.fix_idx = e.fix_idx;
            }
            None => {
                net.insert(
                    key,
                    Net {
                        first_old: e.old,
                        last_new: e.new,
                        seq: e.seq,
                        fix_idx: e.fix_idx,
                    },
                );
            }
        }
    }
    let mut fixes = FixLookup::new(reader);
    for ((_, row, column), n) in net {
        if n.first_old == n.last_new {
            continue;
        }
        let (old, new) = if reversed {
            (n.last_new, n.first_old)
        } else {
            (n.first_old, n.last_new)
        };
        out.cells.push(CellChange {
            row: RowId(row),
            old_row: None,
            column,
            old,
            new,
            by: fixes.get(n.seq, n.fix_idx)?,
        });
    }
    let marks = reader.marks(table, lo, hi)?;
    out.index_rows_read += marks.len() as u64;
    let mut seen_marks: HashSet<(String, String)> = HashSet::new();
    for m in marks {
        if !seen_marks.insert((m.kind.clone(), m.target.clone())) {
            continue;
        }
        // A mark set before `lo` too is no change.
        if !reader
            .marks_of(table, &m.kind, &m.target, ingest, lo)?
            .is_empty()
        {
            continue;
        }
        match m.kind.as_str() {
            "exclude" | "distrust" => {}
            "withdraw" => {
                // A fix withdrawn here: its exclusions and distrust set before `lo` end.
                let Some((s, f)) = m
                    .target
                    .split_once('.')
                    .and_then(|(s, f)| Some((s.parse::<u64>().ok()?, f.parse::<u64>().ok()?)))
                else {
                    continue;
                };
                if s > lo || f == 0 {
                    continue;
                }
                for ended in reader.marks(table, s - 1, s)? {
                    if ended.seq != s || ended.fix_idx + 1 != f {
                        continue;
                    }
                    let change = MarkChange {
                        target: ended.target.clone(),
                        set_in_to: reversed,
                        by: fixes.get(m.seq, m.fix_idx)?,
                    };
                    match ended.kind.as_str() {
                        "exclude" => out.rows_excluded.push(change),
                        "distrust" => out.columns_distrusted.push(change),
                        _ => {}
                    }
                }
                continue;
            }
            // Kept values and notes change no value.
            _ => continue,
        }
        let change = MarkChange {
            target: m.target.clone(),
            set_in_to: !reversed,
            by: fixes.get(m.seq, m.fix_idx)?,
        };
        if m.kind == "exclude" {
            out.rows_excluded.push(change);
        } else {
            out.columns_distrusted.push(change);
        }
    }
    Ok(out)
}

fn hasher() -> impl BuildHasher {
    std::hash::BuildHasherDefault::<std::collections::hash_map::DefaultHasher>::default()
}

fn row_hash(b: &impl BuildHasher, cells: &[Option<String>], cols: &[usize], excluded: bool) -> u64 {
    let mut h = b.build_hasher();
    for &c in cols {
        match &cells[c] {
            None => h.write_u8(0),
            Some(v) => {
                h.write_u8(1);
                h.write_usize(v.len());
                h.write(v.as_bytes());
            }
        }
    }
    h.write_u8(excluded as u8);
    h.finish()
}

fn across_extracts(reader: &Reader<'_>, from: &Version, to: &Version) -> Result<Diff> {
    let mut out = Diff {
        table: to.table.clone(),
        from_seq: from.seq,
        to_seq: to.seq,
        across_extracts: true,
        to_header: to.header().to_vec(),
        from_header: from.header().to_vec(),
        ..Diff::default()
    };
    // Columns in common, in TO's order: (from index, to index).
    let mut common: Vec<(usize, usize)> = Vec::new();
    for (ti, name) in to.header().iter().enumerate() {
        match from.header().iter().position(|h| h == name) {
            Some(fi) => common.push((fi, ti)),
            None => out.columns_added.push(name.clone()),
        }
    }
    for name in from.header() {
        if !to.header().contains(name) {
            out.columns_removed.push(name.clone());
        }
    }
    for &(fi, ti) in &common {
        if from.is_distrusted(fi) != to.is_distrusted(ti) {
            out.columns_distrusted.push(MarkChange {
                target: to.header()[ti].clone(),
                set_in_to: to.is_distrusted(ti),
                by: None,
            });
        }
    }
    let from_cols: Vec<usize> = common.iter().map(|c| c.0).collect();
    let to_cols: Vec<usize> = common.iter().map(|c| c.1).collect();
    let b = hasher();
    let keyed = !from.def.key.is_empty() && from.def.key == to.def.key;
    // (from cells, to cells, from excluded, to excluded) of row pairs whose hashes differ.
    let mut pairs: Vec<RowPair> = Vec::new();
    if keyed {
        let mut map: HashMap<String, (u64, bool)> = HashMap::new();
        from.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            map.insert(
                r.id.0.clone(),
                (row_hash(&b, r.cells, &from_cols, r.excluded), r.excluded),
            );
            Ok(ControlFlow::Continue(()))
        })?;
        let mut changed_to: HashMap<String, (Vec<Option<String>>, bool)> = HashMap::new();
        to.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            match map.remove(&r.id.0) {
                None => out.rows_added.push(RowChange {
                    row: r.id.clone(),
                    cells: r.cells.to_vec(),
                }),
                Some((h, _)) => {
                    if h != row_hash(&b, r.cells, &to_cols, r.excluded) {
                        changed_to.insert(r.id.0.clone(), (r.cells.to_vec(), r.excluded));
                    }
                }
            }
            Ok(ControlFlow::Continue(()))
        })?;
        let removed: HashSet<String> = map.into_keys().collect();
        from.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            if removed.contains(&r.id.0) {
                out.rows_removed.push(RowChange {
                    row: r.id.clone(),
                    cells: r.cells.to_vec(),
                });
            } else if let Some((cells, ex)) = changed_to.remove(&r.id.0) {
                pairs.push((r.id.clone(), None, r.cells.to_vec(), cells, r.excluded, ex));
            }
            Ok(ControlFlow::Continue(()))
        })?;
    } else {
        let mut old_h = Vec::new();
        from.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            old_h.push(row_hash(&b, r.cells, &from_cols, r.excluded));
            Ok(ControlFlow::Continue(()))
        })?;
        let mut new_h = Vec::new();
        to.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            new_h.push(row_hash(&b, r.cells, &to_cols, r.excluded));
            Ok(ControlFlow::Continue(()))
        })?;
        let ops = similar::capture_diff_slices(similar::Algorithm::Myers, &old_h, &new_h);
        drop((old_h, new_h));
        // Positions are 1-based; pair up replaced runs row by row.
        let mut removed: HashSet<u64> = HashSet::new();
        let mut added: HashSet<u64> = HashSet::new();
        let mut paired: HashMap<u64, u64> = HashMap::new();
        for op in ops {
            match op {
                similar::DiffOp::Equal { .. } => {}
                similar::DiffOp::Delete {
                    old_index, old_len, ..
                } => {
                    removed.extend((old_index..old_index + old_len).map(|i| i as u64 + 1));
                }
                similar::DiffOp::Insert {
                    new_index, new_len, ..
                } => {
                    added.extend((new_index..new_index + new_len).map(|i| i as u64 + 1));
                }
                similar::DiffOp::Replace {
                    old_index,
                    old_len,
                    new_index,
                    new_len,
                } => {
                    let n = old_len.min(new_len);
                    for k in 0..n {
                        paired.insert((old_index + k) as u64 + 1, (new_index + k) as u64 + 1);
                    }
                    removed.extend((old_index + n..old_index + old_len).map(|i| i as u64 + 1));
                    added.extend((new_index + n..new_index + new_len).map(|i| i as u64 + 1));
                }
            }
        }
        let mut old_cells: HashMap<u64, (Vec<Option<String>>, bool)> = HashMap::new();
        from.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            if removed.contains(&r.pos) {
                out.rows_removed.push(RowChange {
                    row: r.id.clone(),
                    cells: r.cells.to_vec(),
                });
            } else if paired.contains_key(&r.pos) {
                old_cells.insert(r.pos, (r.cells.to_vec(), r.excluded));
            }
            Ok(ControlFlow::Continue(()))
        })?;
        let by_new: HashMap<u64, u64> = paired.iter().map(|(o, n)| (*n, *o)).collect();
        to.for_each_row(reader, |r| {
            out.rows_streamed += 1;
            if added.contains(&r.pos) {
                out.rows_added.push(RowChange {
                    row: r.id.clone(),
                    cells: r.cells.to_vec(),
                });
            } else if let Some(old_pos) = by_new.get(&r.pos)
                && let Some((cells, ex)) = old_cells.remove(old_pos)
            {
                let old_row = (*old_pos != r.pos).then(|| RowId::from_position(*old_pos));
                pairs.push((
                    r.id.clone(),
                    old_row,
                    cells,
                    r.cells.to_vec(),
                    ex,
                    r.excluded,
                ));
            }
            Ok(ControlFlow::Continue(()))
        })?;
    }
    for (row, old_row, old_cells, new_cells, old_ex, new_ex) in pairs {
        for &(fi, ti) in &common {
            if old_cells[fi] != new_cells[ti] {
                out.cells.push(CellChange {
                    row: row.clone(),
                    old_row: old_row.clone(),
                    column: to.header()[ti].clone(),
                    old: old_cells[fi].clone(),
                    new: new_cells[ti].clone(),
                    by: None,
                });
            }
        }
        if old_ex != new_ex {
            out.rows_excluded.push(MarkChange {
                target: row.0.clone(),
                set_in_to: new_ex,
                by: None,
            });
        }
    }
    Ok(out)
}

/// A piece of an inline difference between two long texts.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Piece {
    /// Text both have.
    Same(String),
    /// Text only the old value has.
    Gone(String),
    /// Text only the new value has.
    Came(String),
}

/// A word-level difference between two texts.
pub fn inline(old: &str, new: &str) -> Vec<Piece> {
    let diff = similar::TextDiff::from_words(old, new);
    let mut out: Vec<Piece> = Vec::new();
    for change in diff.iter_all_changes() {
        let text = change.value().to_string();
        let piece = match change.tag() {
            similar::ChangeTag::Equal => Piece::Same(text),
            similar::ChangeTag::Delete => Piece::Gone(text),
            similar::ChangeTag::Insert => Piece::Came(text),
        };
        match (out.last_mut(), &piece) {
            (Some(Piece::Same(a)), Piece::Same(b))
            | (Some(Piece::Gone(a)), Piece::Gone(b))
            | (Some(Piece::Came(a)), Piece::Came(b)) => a.push_str(b),
            _ => out.push(piece),
        }
    }
    out
}

/// Match the rows of two versions of a table without a key: old position → new position for
/// every row the sequence alignment pairs (equal rows, and rows changed in place).
pub fn align_positions(
    reader: &Reader<'_>,
    from: &Version,
    to: &Version,
) -> Result<HashMap<u64, u64>> {
    let common: Vec<(usize, usize)> = to
        .header()
        .iter()
        .enumerate()
        .filter_map(|(ti, name)| {
            from.header()
                .iter()
                .position(|h| h == name)
                .map(|fi| (fi, ti))
        })
        .collect();
    let from_cols: Vec<usize> = common.iter().map(|c| c.0).collect();
    let to_cols: Vec<usize> = common.iter().map(|c| c.1).collect();
    let b = hasher();
    let mut old_h = Vec::new();
    from.for_each_row(reader, |r| {
        old_h.push(row_hash(&b, r.cells, &from_cols, false));
        Ok(ControlFlow::Continue(()))
    })?;
    let mut new_h = Vec::new();
    to.for_each_row(reader, |r| {
        new_h.push(row_hash(&b, r.cells, &to_cols, false));
        Ok(ControlFlow::Continue(()))
    })?;
    let mut map = HashMap::new();
    for op in similar::capture_diff_slices(similar::Algorithm::Myers, &old_h, &new_h) {
        match op {
            similar::DiffOp::Equal {
                old_index,
                new_index,
                len,
            } => {
                for k in 0..len {
                    map.insert((old_index + k) as u64 + 1, (new_index + k) as u64 + 1);
                }
            }
            similar::DiffOp::Replace {
                old_index,
                old_len,
                new_index,
                new_len,
            } => {
                for k in 0..old_len.min(new_len) {
                    map.insert((old_index + k) as u64 + 1, (new_index + k) as u64 + 1);
                }
            }
            _ => {}
        }
    }
    Ok(map)
}
