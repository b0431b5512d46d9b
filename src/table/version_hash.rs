//! The canonical hash of a table version, built row by row. Ingest (the raw version) and the
//! rebuild of any later version feed the same builder, so a version's hash does not depend on
//! how it was produced.

use crate::hash::{VersionHash, VersionHasher};
use crate::model::{RowBatch, RowId};

/// Builds the canonical version hash: header, then each row (id, exclusion, cells), then the
/// distrusted columns. Ingest and rebuild both use it, so they agree by construction.
pub struct VersionHashBuilder {
    h: VersionHasher,
}

impl VersionHashBuilder {
    /// Start with the header.
    pub fn new(header: &[String]) -> Self {
        let mut h = VersionHasher::new();
        for name in header {
            h.item(1, Some(name));
        }
        VersionHashBuilder { h }
    }

    /// Add one row.
    pub fn row(&mut self, id: &RowId, excluded: bool, cells: &[Option<String>]) {
        self.h.item(2, Some(id.as_str()));
        if excluded {
            self.h.item(3, None);
        }
        for c in cells {
            self.h.item(4, c.as_deref());
        }
    }

    /// Add every row of a batch, in order (the same as [`VersionHashBuilder::row`] for each).
    pub fn batch(&mut self, batch: &RowBatch) {
        for r in 0..batch.len() {
            self.h.item(2, Some(batch.id(r)));
            if batch.excluded(r) {
                self.h.item(3, None);
            }
            for c in 0..batch.n_cols() {
                self.h.item(4, batch.cell(r, c));
            }
        }
    }

    /// Add one raw row (not excluded, no missing cells), as ingest sees it.
    pub fn raw_row(&mut self, id: &str, cells: &[String]) {
        self.h.item(2, Some(id));
        for c in cells {
            self.h.item(4, Some(c));
        }
    }

    /// Finish with the distrusted columns.
    pub fn finish(mut self, header: &[String], distrusted: &[bool]) -> VersionHash {
        for (name, d) in header.iter().zip(distrusted) {
            if *d {
                self.h.item(5, Some(name));
            }
        }
        self.h.finish()
    }
}
