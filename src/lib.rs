//! emend: a versioned, signed history store for datasets under cleaning.
//!
//! Raw extracts are stored byte for byte, content-addressed with BLAKE3; each fix is a signed,
//! annotated commit of cell-level edits; any version can be rebuilt from the raw extract,
//! exported, and verified. The library does the work and returns data; the `emend` binary
//! parses arguments, prints and sets exit codes.
//!
//! Start at [`store::Store`] (open or create a store), [`ledger`] (ingest, record fixes,
//! commit), [`query`] (revisions, versions, diff, why, verify) and [`views`] (export, profile,
//! check, report).
#![deny(missing_docs)]

pub mod checks;
pub mod error;
pub mod hash;
pub mod ingest;
pub mod ledger;
pub mod model;
pub mod profile;
pub mod progress;
pub mod query;
pub mod report;
pub mod signing;
pub mod store;
pub mod table;
#[cfg(feature = "team")]
pub mod team;
pub mod values;
pub mod views;

pub use error::{Error, Result};

#[cfg(test)]
mod testdata;
