//! Adapters that fill the pure renderers from a version: export (CSV and raw bytes; `xlsx`, the
//! review workbook), the profile,
//! the rules check and the audit report with its codebook, provenance and decision views.
//!
//! Read-only, like `query`, on which they build; the computations and the rendering live in
//! the pure `profile`, `checks` and `report` modules, which know nothing of the store.
//! **Direction:** `views` reads `query` and `store` and feeds `profile`, `checks` and `report`.

pub mod audit;
pub mod check;
pub mod export;
pub mod profiling;
#[cfg(feature = "xlsx")]
pub mod xlsx;

pub use check::check_version;
