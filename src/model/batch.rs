//! A batch of rows as plain data: what a version hands, a few thousand rows at a time, to the
//! work that runs over it on several cores (profile, check, hash, export). No I/O.
//!
//! Rows are kept row-major in one text buffer with one end offset per cell, so a batch costs its
//! text plus 5 bytes a cell, and filling it reuses its buffers batch after batch.

/// Rows of one table version, in extract order.
#[derive(Debug, Clone, Default)]
pub struct RowBatch {
    n_cols: usize,
    /// Per row: 1-based position in the extract.
    pos: Vec<u64>,
    /// Per row: whether a fix excluded it.
    excluded: Vec<bool>,
    /// Every row's id, one after another; `id_ends[r]` is where row `r`'s ends.
    ids: String,
    id_ends: Vec<usize>,
    /// Every cell's text, row after row; `ends[r * n_cols + c]` is where cell (r, c) ends.
    text: String,
    ends: Vec<usize>,
    /// Per cell: missing (declared missing by a fix), as opposed to text.
    missing: Vec<bool>,
}

impl RowBatch {
    /// An empty batch of rows with `n_cols` cells each.
    pub fn new(n_cols: usize) -> RowBatch {
        RowBatch {
            n_cols,
            ..RowBatch::default()
        }
    }

    /// Empties the batch, keeping its buffers.
    pub fn clear(&mut self) {
        self.pos.clear();
        self.excluded.clear();
        self.ids.clear();
        self.id_ends.clear();
        self.text.clear();
        self.ends.clear();
        self.missing.clear();
    }

    /// Adds a row. `cells` must have the batch's number of cells.
    pub fn push(&mut self, pos: u64, id: &str, excluded: bool, cells: &[Option<String>]) {
        debug_assert_eq!(cells.len(), self.n_cols, "a row has one cell per column");
        self.pos.push(pos);
        self.excluded.push(excluded);
        self.ids.push_str(id);
        self.id_ends.push(self.ids.len());
        for cell in cells {
            if let Some(t) = cell {
                self.text.push_str(t);
            }
            self.ends.push(self.text.len());
            self.missing.push(cell.is_none());
        }
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.pos.len()
    }

    /// Whether the batch has no row.
    pub fn is_empty(&self) -> bool {
        self.pos.is_empty()
    }

    /// Number of cells a row has.
    pub fn n_cols(&self) -> usize {
        self.n_cols
    }

    /// Bytes of text held (cells and ids).
    pub fn text_bytes(&self) -> usize {
        self.text.len() + self.ids.len()
    }

    /// Row `r`'s 1-based position in the extract.
    pub fn pos(&self, r: usize) -> u64 {
        self.pos[r]
    }

    /// Whether a fix excluded row `r`.
    pub fn excluded(&self, r: usize) -> bool {
        self.excluded[r]
    }

    /// Row `r`'s id, as stored in a [`super::RowId`].
    pub fn id(&self, r: usize) -> &str {
        let start = if r == 0 { 0 } else { self.id_ends[r - 1] };
        &self.ids[start..self.id_ends[r]]
    }

    /// Cell (`r`, `c`): `None` when declared missing.
    pub fn cell(&self, r: usize, c: usize) -> Option<&str> {
        let i = r * self.n_cols + c;
        if self.missing[i] {
            return None;
        }
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        Some(&self.text[start..self.ends[i]])
    }

    /// Row `r`'s cells into `out` (cleared first).
    pub fn row_into<'b>(&'b self, r: usize, out: &mut Vec<Option<&'b str>>) {
        out.clear();
        out.extend((0..self.n_cols).map(|c| self.cell(r, c)));
    }

    /// Row `r`'s cells as owned values.
    pub fn row_owned(&self, r: usize) -> Vec<Option<String>> {
        (0..self.n_cols)
            .map(|c| self.cell(r, c).map(str::to_owned))
            .collect()
    }

    /// The rows a fix did not exclude.
    pub fn included(&self) -> Vec<usize> {
        (0..self.len()).filter(|&r| !self.excluded[r]).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_ids_and_missing_come_back_as_pushed() {
        let mut b = RowBatch::new(3);
        b.push(
            1,
            "a",
            false,
            &[Some("x".into()), None, Some(String::new())],
        );
        b.push(
            3,
            "b\u{1f}c",
            true,
            &[Some("".into()), Some("long value".into()), Some("z".into())],
        );
        assert_eq!(b.len(), 2);
        assert_eq!((b.pos(0), b.pos(1)), (1, 3));
        assert_eq!((b.id(0), b.id(1)), ("a", "b\u{1f}c"));
        assert!(!b.excluded(0) && b.excluded(1));
        assert_eq!(
            b.row_owned(0),
            vec![Some("x".into()), None, Some(String::new())]
        );
        assert_eq!(b.cell(1, 1), Some("long value"));
        assert_eq!(b.cell(1, 0), Some(""));
        assert_eq!(b.included(), vec![0]);
        b.clear();
        assert!(b.is_empty());
        b.push(9, "q", false, &[None, None, None]);
        assert_eq!(b.row_owned(0), vec![None, None, None]);
        assert_eq!(b.id(0), "q");
    }
}
