//! Everything that signs: ingest commits, recording and committing fixes, tags, trust, carrying
//! fixes to a new extract, and adopting rules files.
//!
//! Each operation is one store transaction that ends in [`seal`]: a recorded fix and its
//! evidence files, an ingest and its commit, or a commit of all pending fixes land whole or not
//! at all. Signing takes a [`CommitContext`] handed in by the caller.
//! **Invariant:** the ledger never reads the clock, the environment or a key file.
//! **Invariant:** a fix means the same on every extract: committing and carrying both apply
//! fixes through [`apply::FixApplier`].
//! **Direction:** `ledger` builds on `query` (revisions, versions) and `store`; nothing below
//! it imports it.

pub mod adopt;
pub mod apply;
pub mod carry;
pub mod fixes;
pub mod ingest;
#[cfg(test)]
mod model_check;
pub mod seal;
pub mod tag;
#[cfg(test)]
pub(crate) mod testkit;
pub mod trust;

pub use carry::carry;
pub use fixes::{
    Attachments, FixRequest, PREVIEW_SAMPLES, Preview, Recorded, commit_pending, committed_fix,
    discard, discard_one, record_fix, record_fixes, store_bytes, store_file,
};
pub use ingest::{check_table_name, ingest, ingest_each, ingest_input, spool_beside};
pub use seal::{CommitContext, CommitOutcome, seal};
pub use tag::{check_tag_name, tag};
pub use trust::{revoke_key, trust, trust_key};
