//! emend: a versioned, signed history store for datasets under cleaning.
//!
//! Raw extracts are stored byte for byte, content-addressed with BLAKE3; each fix is a signed,
//! annotated commit of cell-level edits; any version can be rebuilt from the raw extract,
//! exported, and verified. The library does the work and returns data; the `emend` binary
//! parses arguments, prints and sets exit codes.
//!
//! Start at [`store::Store`] (open or create a store), [`history`] (ingest, record fixes,
//! commit, resolve revisions) and [`history::verify`].
#![deny(missing_docs)]

pub mod checks;
pub mod error;
pub mod hash;
pub mod history;
pub mod ingest;
pub mod model;
pub mod profile;
pub mod report;
pub mod signing;
pub mod store;

pub use error::{Error, Result};

#[cfg(test)]
mod testdata;
