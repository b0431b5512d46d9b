//! Read-only answers from history: commit bodies and the log, revisions, the rebuild of a
//! table version, diffs, the history of a cell, row or column (`why`), the rules in force, and
//! the full audit (`verify`).
//!
//! Nothing here writes: every function takes a [`crate::store::Reader`], which works on an open
//! store or inside a write transaction, so the ledger builds on the same answers.
//! **Invariant:** a version is never stored; [`Version`] rebuilds it by streaming the extract
//! and applying the net cell edits up to a commit, in O(edits + one row) memory.
//! **Direction:** `query` reads `store`, `table` and `model`; it imports nothing from `ledger`,
//! `views` or `cli`.

pub mod commits;
pub mod diff;
pub mod guard;
pub mod in_force;
pub mod receipt;
pub mod rev;
pub mod scan;
pub mod verify;
pub mod version;
pub mod why;

pub use commits::{decode, ingest_record, log, withdrawn_fixes};
pub use diff::align_positions;
pub use in_force::{breaking_rows, rules_at};
pub use rev::{Rev, parse_row, parse_rows, resolve, version_at};
pub use scan::{RowSink, scan};
pub use verify::VerifyReport;
pub use version::{Pick, RowView, Version};
