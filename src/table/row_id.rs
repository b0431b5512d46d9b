//! The one rule that names a row: its key values joined by [`KEY_SEPARATOR`], or its 1-based
//! position when the table has no key. Ingest, the rebuild of a version and the duplicate-key
//! listing all build ids here, so a row has the same id wherever it is read.

use crate::model::{KEY_SEPARATOR, RowId};

/// Builds row ids from a row's decoded cells, reusing one buffer.
#[derive(Debug, Clone)]
pub struct RowIdBuilder {
    key_idx: Vec<usize>,
}

impl RowIdBuilder {
    /// A builder for a table whose key columns are at `key_idx` (empty: rows by position).
    pub fn new(key_idx: Vec<usize>) -> Self {
        RowIdBuilder { key_idx }
    }

    /// Whether the table has a key.
    pub fn is_keyed(&self) -> bool {
        !self.key_idx.is_empty()
    }

    /// The key column indexes.
    pub fn key_idx(&self) -> &[usize] {
        &self.key_idx
    }

    /// Writes the id of the row at 1-based position `pos` with `cells` into `out` (cleared first).
    pub fn build_into<S: AsRef<str>>(&self, pos: u64, cells: &[S], out: &mut String) {
        out.clear();
        if self.key_idx.is_empty() {
            use std::fmt::Write;
            let _ = write!(out, "{pos}");
            return;
        }
        for (j, &k) in self.key_idx.iter().enumerate() {
            if j > 0 {
                out.push(KEY_SEPARATOR);
            }
            out.push_str(cells[k].as_ref());
        }
    }

    /// The id of the row at 1-based position `pos` with `cells`.
    pub fn build<S: AsRef<str>>(&self, pos: u64, cells: &[S]) -> RowId {
        let mut out = String::new();
        self.build_into(pos, cells, &mut out);
        RowId(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keyed_rows_join_their_key_values_and_keyless_rows_use_their_position() {
        let cells = ["S-1", "Fox Run", "2026-10-01"];
        assert_eq!(RowIdBuilder::new(vec![]).build(7, &cells).as_str(), "7");
        assert_eq!(RowIdBuilder::new(vec![0]).build(7, &cells).as_str(), "S-1");
        let composite = RowIdBuilder::new(vec![1, 2]).build(7, &cells);
        assert_eq!(composite, RowId::from_key_values(["Fox Run", "2026-10-01"]));
        assert_eq!(composite.to_string(), "Fox Run,2026-10-01");
    }
}
