//! Tables as bytes and text: the strict RFC 4180 reader and writer (`csv`), decoding and the
//! delimiter guess (`dialect`), the one row-id builder (`row_id`), where each row starts
//! (`row_map`), the canonical version hash (`version_hash`), a workbook's sheet as cells of
//! canonical text (`sheet`, the one definition), and recognising workbooks (`workbook`).
//!
//! Pure and streaming: nothing here touches the store, and every reader works one record at a
//! time in a reused buffer. Both ingest and the rebuild of a version read through this module,
//! so they agree on what a row is, what it is called and what it hashes to.

pub mod csv;
pub mod dialect;
pub mod row_id;
pub mod row_map;
#[cfg(feature = "xlsx")]
pub mod sheet;
pub mod version_hash;
pub mod workbook;

pub use dialect::{decode_into, guess_delimiter};
pub use row_id::RowIdBuilder;
pub use row_map::{RowMap, RowMapBuilder, key_hash};
pub use version_hash::VersionHashBuilder;
