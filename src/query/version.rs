//! A table version: an extract plus the net effect of the fixes up to one commit, streamed row
//! by row. Memory is O(edits + one row), never O(table).

use super::commits::ingest_record;
use crate::error::{Error, Result};
use crate::hash::VersionHash;
use crate::model::{IngestRecord, RowId};
use crate::store::ChunkCache;
use crate::store::Reader;
use crate::table::csv::{CsvReader, RawRecord, ReadError};
use crate::table::{RowIdBuilder, RowMapBuilder, VersionHashBuilder, decode_into, key_hash};
use std::collections::{HashMap, HashSet};
use std::ops::ControlFlow;

/// One row as a version presents it.
#[derive(Debug)]
pub struct RowView<'r> {
    /// 1-based position in the extract (blank lines not counted).
    pub pos: u64,
    /// The row's identity.
    pub id: &'r RowId,
    /// Cell values; `None` is missing.
    pub cells: &'r [Option<String>],
    /// Whether a fix excluded the row.
    pub excluded: bool,
}

/// Which rows [`Version::for_each_picked`] reads.
#[derive(Debug, Clone, Copy)]
pub enum Pick<'p> {
    /// These rows, by id (a table without a key names rows by position).
    Ids(&'p [RowId]),
    /// The rows at 1-based positions `from..=to`.
    Positions(u64, u64),
}

/// A row found by id: (position, cells, excluded).
pub type FoundRow = (u64, Vec<Option<String>>, bool);

/// The state of one table at one commit.
#[derive(Debug, Clone)]
pub struct Version {
    /// Table.
    pub table: String,
    /// The commit this version is as of.
    pub seq: u64,
    /// The ingest commit of the extract this version is built on.
    pub ingest_seq: u64,
    /// The raw extract, with no fixes applied.
    pub raw: bool,
    /// The extract's record (header, key, dialect).
    pub def: IngestRecord,
    /// Net cell edits: row id -> (column index, value).
    edits: HashMap<String, Vec<(usize, Option<String>)>>,
    /// Excluded row ids.
    excluded: HashSet<String>,
    /// Per column: distrusted.
    distrusted: Vec<bool>,
    /// Number of net edited cells.
    n_edited: usize,
}

impl Version {
    /// The version of `table` as of commit `seq`; with `raw`, the extract with no fixes.
    pub fn load(reader: &Reader<'_>, table: &str, seq: u64, raw: bool) -> Result<Version> {
        let (ingest_seq, _) = reader
            .extract_at(table, seq)?
            .ok_or_else(|| Error::UnknownTable(table.to_string()))?;
        let def = ingest_record(reader, ingest_seq)?;
        let mut v = Version {
            table: table.to_string(),
            seq,
            ingest_seq,
            raw,
            distrusted: vec![false; def.header.len()],
            def,
            edits: HashMap::new(),
            excluded: HashSet::new(),
            n_edited: 0,
        };
        if raw {
            return Ok(v);
        }
        let mut latest: HashMap<(String, usize), Option<String>> = HashMap::new();
        for e in reader.cell_edits(table, ingest_seq, seq)? {
            let col = v.col_idx(&e.column)?;
            latest.insert((e.row, col), e.new);
        }
        v.n_edited = latest.len();
        for ((row, col), value) in latest {
            v.edits.entry(row).or_default().push((col, value));
        }
        for m in reader.marks(table, ingest_seq, seq)? {
            match m.kind.as_str() {
                "exclude" => {
                    v.excluded.insert(m.target);
                }
                "distrust" => {
                    let col = v.col_idx(&m.target)?;
                    v.distrusted[col] = true;
                }
                // Kept values and notes change nothing in the version.
                _ => {}
            }
        }
        Ok(v)
    }

    /// Index of a column by name.
    pub fn col_idx(&self, column: &str) -> Result<usize> {
        self.def
            .header
            .iter()
            .position(|h| h == column)
            .ok_or_else(|| Error::UnknownColumn {
                table: self.table.clone(),
                column: column.to_string(),
            })
    }

    /// Header names.
    pub fn header(&self) -> &[String] {
        &self.def.header
    }

    /// Whether column `idx` is distrusted.
    pub fn is_distrusted(&self, idx: usize) -> bool {
        self.distrusted[idx]
    }

    /// Distrusted column flags.
    pub fn distrusted(&self) -> &[bool] {
        &self.distrusted
    }

    /// Whether a fix up to this version excluded the row.
    pub fn is_excluded(&self, row: &RowId) -> bool {
        self.excluded.contains(row.as_str())
    }

    /// Whether a fix up to this version set the cell at (`row`, column index `col`).
    pub fn is_edited(&self, row: &RowId, col: usize) -> bool {
        self.edits
            .get(row.as_str())
            .is_some_and(|list| list.iter().any(|(c, _)| *c == col))
    }

    /// Number of excluded rows.
    pub fn n_excluded(&self) -> usize {
        self.excluded.len()
    }

    /// Number of cells whose value differs from the raw extract by a fix.
    pub fn n_edited(&self) -> usize {
        self.n_edited
    }

    /// Stream every row of the version through `f`, in extract order.
    pub fn for_each_row<F>(&self, reader: &Reader<'_>, mut f: F) -> Result<()>
    where
        F: FnMut(&RowView<'_>) -> Result<ControlFlow<()>>,
    {
        if let crate::model::TextEncoding::Workbook(sheet) = self.def.dialect.encoding {
            return self.for_each_sheet_row(reader, sheet, f);
        }
        let blob = reader.open_blob(&self.def.extract)?;
        // A stored extract met the limits in force when it was ingested (which may have been
        // raised then), so reading it back applies none.
        let mut csv = CsvReader::new(blob, self.def.dialect.delimiter).unlimited();
        let mut rec = RawRecord::default();
        // The header was validated at ingest.
        self.read_stored(&mut csv, &mut rec)?;
        self.stream(&mut csv, 0, &mut f).map(|_| ())
    }

    /// Stream only the rows `pick` names through `f`, in extract order. With the extract's
    /// row map, only the groups of rows that hold them are read, so the cost does not grow
    /// with the table; an extract ingested before row maps existed is read in full.
    ///
    /// The map only says where to look: every row handed to `f` was parsed from the stored
    /// extract (each piece checked against its hash) and has the id or position asked for.
    pub fn for_each_picked<F>(&self, reader: &Reader<'_>, pick: &Pick<'_>, mut f: F) -> Result<()>
    where
        F: FnMut(&RowView<'_>) -> Result<ControlFlow<()>>,
    {
        let Some(map) = reader.row_map(self.ingest_seq)? else {
            return self.pick_by_scan(reader, pick, f);
        };
        let damaged =
            |e: String| Error::Tampered(format!("the row map of commit {}: {e}", self.ingest_seq));
        // The groups to read, and what to take from them.
        let mut groups: Vec<u32> = Vec::new();
        let (lo, hi, wanted): (u64, u64, Option<HashSet<&str>>) = match pick {
            Pick::Positions(a, b) => {
                let a = (*a).max(1);
                let b = (*b).min(map.n_rows);
                if a <= b {
                    let first = map.group_of_pos(a).map_err(damaged)?;
                    let last = map.group_of_pos(b).map_err(damaged)?;
                    if let (Some(first), Some(last)) = (first, last) {
                        groups.extend(first..=last);
                    }
                }
                (a, b, None)
            }
            Pick::Ids(ids) if !map.is_keyed() => {
                // Rows of a table without a key are named by position.
                let mut positions: Vec<u64> = ids
                    .iter()
                    .filter_map(|id| id.as_str().parse().ok())
                    .collect();
                positions.sort_unstable();
                positions.dedup();
                for p in &positions {
                    if let Some(g) = map.group_of_pos(*p).map_err(damaged)? {
                        groups.push(g);
                    }
                }
                (
                    1,
                    u64::MAX,
                    Some(ids.iter().map(|id| id.as_str()).collect()),
                )
            }
            Pick::Ids(ids) => {
                for id in ids.iter() {
                    groups.extend(
                        map.groups_of_key(key_hash(id.as_str().as_bytes()))
                            .map_err(damaged)?,
                    );
                }
                (
                    1,
                    u64::MAX,
                    Some(ids.iter().map(|id| id.as_str()).collect()),
                )
            }
        };
        groups.sort_unstable();
        groups.dedup();
        let mut cache = ChunkCache::default();
        for g in groups {
            let (group, end) = map.group(g).map_err(damaged)?;
            let bytes = reader.blob_range(&self.def.extract, group.offset, end, &mut cache)?;
            let mut csv = CsvReader::new(&bytes[..], self.def.dialect.delimiter)
                .unlimited()
                .resume_at(group.offset, group.line);
            let flow = self.stream(&mut csv, group.first_pos - 1, &mut |row| {
                if row.pos > hi {
                    return Ok(ControlFlow::Break(()));
                }
                let take =
                    row.pos >= lo && wanted.as_ref().is_none_or(|w| w.contains(row.id.as_str()));
                if take {
                    f(row)
                } else {
                    Ok(ControlFlow::Continue(()))
                }
            })?;
            if flow.is_break() && !matches!(pick, Pick::Ids(_)) {
                break;
            }
        }
        Ok(())
    }

    /// [`Version::for_each_picked`] for an extract with no row map: one pass over it all.
    fn pick_by_scan<F>(&self, reader: &Reader<'_>, pick: &Pick<'_>, mut f: F) -> Result<()>
    where
        F: FnMut(&RowView<'_>) -> Result<ControlFlow<()>>,
    {
        let wanted: Option<HashSet<&str>> = match pick {
            Pick::Ids(ids) => Some(ids.iter().map(|id| id.as_str()).collect()),
            Pick::Positions(..) => None,
        };
        let mut left = wanted.as_ref().map_or(0, HashSet::len);
        self.for_each_row(reader, |row| match (pick, &wanted) {
            (Pick::Positions(a, b), _) => {
                if row.pos > *b {
                    Ok(ControlFlow::Break(()))
                } else if row.pos >= *a {
                    f(row)
                } else {
                    Ok(ControlFlow::Continue(()))
                }
            }
            (_, Some(w)) if w.contains(row.id.as_str()) => {
                left -= 1;
                let flow = f(row)?;
                if left == 0 {
                    return Ok(ControlFlow::Break(()));
                }
                Ok(flow)
            }
            _ => Ok(ControlFlow::Continue(())),
        })
    }

    fn read_stored<R: std::io::Read>(
        &self,
        csv: &mut CsvReader<R>,
        rec: &mut RawRecord,
    ) -> Result<bool> {
        let place = || format!("stored extract {}", self.def.extract.short());
        csv.read_record(rec).map_err(|e| match e {
            ReadError::Csv(c) => Error::Corrupt(format!(
                "{} no longer parses at line {}: {}",
                place(),
                c.line,
                c.problem
            )),
            // A damaged chunk arrives wrapped in an io error: hand the store's own error on.
            ReadError::Io(io) => match io.into_inner().map(|inner| inner.downcast::<Error>()) {
                Some(Ok(e)) => *e,
                Some(Err(other)) => Error::Corrupt(format!("{}: {other}", place())),
                None => Error::Corrupt(format!("{} could not be read", place())),
            },
        })
    }

    /// Stream the data records `csv` yields, the first being the row after position `pos`,
    /// through `f`; says whether `f` stopped it.
    fn stream<R: std::io::Read>(
        &self,
        csv: &mut CsvReader<R>,
        mut pos: u64,
        f: &mut dyn FnMut(&RowView<'_>) -> Result<ControlFlow<()>>,
    ) -> Result<ControlFlow<()>> {
        let place = || format!("stored extract {}", self.def.extract.short());
        let mut rec = RawRecord::default();
        let n_cols = self.def.header.len();
        let row_ids = RowIdBuilder::new(
            self.def
                .key
                .iter()
                .map(|k| self.col_idx(k))
                .collect::<Result<_>>()?,
        );
        let mut text: Vec<String> = vec![String::new(); n_cols];
        let mut cells: Vec<Option<String>> = vec![None; n_cols];
        let mut id = RowId(String::new());
        while self.read_stored(csv, &mut rec)? {
            if rec.is_blank_line() && n_cols > 1 {
                continue;
            }
            if rec.len() != n_cols {
                return Err(Error::Corrupt(format!(
                    "{} has a ragged row at line {}",
                    place(),
                    rec.line
                )));
            }
            pos += 1;
            for (i, field) in rec.iter().enumerate() {
                decode_into(field, self.def.dialect.encoding, &mut text[i]).map_err(|_| {
                    Error::Corrupt(format!("{} has bad text at line {}", place(), rec.line))
                })?;
            }
            row_ids.build_into(pos, &text, &mut id.0);
            for (cell, t) in cells.iter_mut().zip(&text) {
                match cell {
                    Some(c) => {
                        c.clear();
                        c.push_str(t);
                    }
                    None => *cell = Some(t.clone()),
                }
            }
            if let Some(list) = self.edits.get(&id.0) {
                for (col, value) in list {
                    cells[*col] = value.clone();
                }
            }
            let view = RowView {
                pos,
                id: &id,
                cells: &cells,
                excluded: self.excluded.contains(&id.0),
            };
            if f(&view)?.is_break() {
                return Ok(ControlFlow::Break(()));
            }
        }
        Ok(ControlFlow::Continue(()))
    }

    /// The row map of this version's extract, rebuilt from its bytes exactly as ingest built
    /// it, for `verify` to compare with the stored one.
    pub fn rebuild_row_map(&self, reader: &Reader<'_>) -> Result<Vec<u8>> {
        let blob = reader.open_blob(&self.def.extract)?;
        let mut csv = CsvReader::new(blob, self.def.dialect.delimiter).unlimited();
        let mut rec = RawRecord::default();
        self.read_stored(&mut csv, &mut rec)?;
        let n_cols = self.def.header.len();
        let key_idx: Vec<usize> = self
            .def
            .key
            .iter()
            .map(|k| self.col_idx(k))
            .collect::<Result<_>>()?;
        let row_ids = RowIdBuilder::new(key_idx.clone());
        let mut map = RowMapBuilder::new(!key_idx.is_empty());
        let mut text: Vec<String> = vec![String::new(); n_cols];
        let mut id = String::new();
        let mut pos = 0u64;
        while self.read_stored(&mut csv, &mut rec)? {
            if rec.is_blank_line() && n_cols > 1 {
                continue;
            }
            pos += 1;
            let mut h = 0;
            if !key_idx.is_empty() {
                for &k in &key_idx {
                    decode_into(
                        rec.get(k).unwrap_or_default(),
                        self.def.dialect.encoding,
                        &mut text[k],
                    )
                    .map_err(|_| Error::Corrupt(format!("bad text at line {}", rec.line)))?;
                }
                row_ids.build_into(pos, &text, &mut id);
                h = key_hash(id.as_bytes());
            }
            map.row(pos, rec.offset, rec.line, h);
        }
        Ok(map.finish(csv.offset()))
    }

    /// [`Version::for_each_row`] for a workbook extract: the stored bytes read whole and the
    /// recorded sheet read through `table::sheet`, exactly as ingest read it (issue 18).
    #[cfg(feature = "xlsx")]
    fn for_each_sheet_row<F>(
        &self,
        reader: &Reader<'_>,
        sheet: crate::model::WorkbookSheet,
        mut f: F,
    ) -> Result<()>
    where
        F: FnMut(&RowView<'_>) -> Result<ControlFlow<()>>,
    {
        let place_text = format!("stored extract {}", self.def.extract.short());
        let mut bytes = Vec::with_capacity(usize::try_from(self.def.n_bytes).unwrap_or(0));
        std::io::Read::read_to_end(&mut reader.open_blob(&self.def.extract)?, &mut bytes).map_err(
            // A damaged chunk arrives wrapped in an io error: hand the store's own error on.
            |io| match io.into_inner().map(|inner| inner.downcast::<Error>()) {
                Some(Ok(e)) => *e,
                _ => Error::Corrupt(format!("{place_text} could not be read")),
            },
        )?;
        let place =
            std::path::PathBuf::from(format!("stored extract {}", self.def.extract.short()));
        let mut book = crate::table::sheet::Workbook::open(&bytes, &place)
            .map_err(|e| Error::Corrupt(format!("{e}")))?;
        let table = book
            .sheet(
                &crate::table::workbook::SheetChoice::Index(sheet.sheet),
                Some(sheet.header_row),
                false,
            )
            .map_err(|e| Error::Corrupt(format!("{e}")))?;
        if table.header != self.def.header {
            return Err(Error::Corrupt(format!(
                "{} no longer has the header its ingest recorded",
                place.display()
            )));
        }
        let row_ids = RowIdBuilder::new(
            self.def
                .key
                .iter()
                .map(|k| self.col_idx(k))
                .collect::<Result<_>>()?,
        );
        let mut cells: Vec<Option<String>> = vec![None; self.def.header.len()];
        let mut id = RowId(String::new());
        let mut pos = 0u64;
        table.for_each_row(|_, text| -> Result<ControlFlow<()>> {
            pos += 1;
            row_ids.build_into(pos, text, &mut id.0);
            for (cell, t) in cells.iter_mut().zip(text) {
                *cell = Some(t.clone());
            }
            if let Some(list) = self.edits.get(&id.0) {
                for (col, value) in list {
                    cells[*col] = value.clone();
                }
            }
            f(&RowView {
                pos,
                id: &id,
                cells: &cells,
                excluded: self.excluded.contains(&id.0),
            })
        })?;
        Ok(())
    }

    /// A workbook extract in a build that reads no workbooks.
    #[cfg(not(feature = "xlsx"))]
    fn for_each_sheet_row<F>(
        &self,
        _reader: &Reader<'_>,
        _sheet: crate::model::WorkbookSheet,
        _f: F,
    ) -> Result<()>
    where
        F: FnMut(&RowView<'_>) -> Result<ControlFlow<()>>,
    {
        Err(Error::Invalid(format!(
            "table '{}' was ingested from a workbook, which this build (without the 'xlsx' feature) cannot read",
            self.table
        )))
    }

    /// The canonical hash of this version and its row count.
    pub fn hash(&self, reader: &Reader<'_>) -> Result<(VersionHash, u64)> {
        let mut h = VersionHashBuilder::new(self.header());
        let mut n = 0;
        self.for_each_row(reader, |row| {
            h.row(row.id, row.excluded, row.cells);
            n += 1;
            Ok(ControlFlow::Continue(()))
        })?;
        Ok((h.finish(self.header(), &self.distrusted), n))
    }

    /// The version hash and row count the signed commits record for this version: the last
    /// commit at or before it that recorded one for the table (the ingest for a raw version).
    pub fn recorded(&self, reader: &Reader<'_>) -> Result<Option<(VersionHash, u64)>> {
        let upto = if self.raw { self.ingest_seq } else { self.seq };
        reader.recorded_version(&self.table, upto)
    }

    /// Finish a hash fed with every row of this version (see [`Version::hash`]).
    pub fn finish_hash(&self, h: VersionHashBuilder) -> VersionHash {
        h.finish(self.header(), &self.distrusted)
    }

    /// Find one row by id (through the row map: see [`Version::for_each_picked`]).
    pub fn find_row(&self, reader: &Reader<'_>, row: &RowId) -> Result<Option<FoundRow>> {
        let mut found = None;
        self.for_each_picked(reader, &Pick::Ids(std::slice::from_ref(row)), |r| {
            if r.id == row {
                found = Some((r.pos, r.cells.to_vec(), r.excluded));
                return Ok(ControlFlow::Break(()));
            }
            Ok(ControlFlow::Continue(()))
        })?;
        Ok(found)
    }
}
