//! Column statistics, type guesses and findings over a table of text cells; pure.
//!
//! Feed a [`TableProfiler`] the header and then each row (or a [`ColumnProfiler`] one
//! column's cells), then `finish` to get a [`TableProfile`]: per column the inferred type,
//! counts (blank, declared missing, distinct), top levels, numeric figures (mean and standard
//! deviation, type-7 quartiles, Tukey fences, modified z-scores), write-ins, suspected
//! missing codes, near-duplicate spellings and flags; and [`Finding`]s, worst first, each
//! with an optional structured [`FixSuggestion`].
//!
//! Start reading at [`column`](mod@column). The other files are functions over data: [`types`] (one
//! cell's kind, the column type), [`stats`] (numbers), [`levels`] and [`variants`] (spellings), [`dependencies`] (patterns between columns), [`finding`]
//! (what is reported), [`table`] (rows and cross-column checks) and [`render`] (terminal
//! pictures).
//!
//! This module reads no files, prints nothing and changes no value: it describes and
//! suggests, and the caller decides. Its memory is bounded by the level cap, the pair-column
//! cap, the value-pair cap of mined dependencies, 8 bytes per numeric cell and 8 bytes a row for
//! finding copies (16 while they are sorted).
//!
//! ```
//! use emend::profile::{FindingKind, TableOptions, TableProfiler};
//! let mut t = TableProfiler::new(&["site", "depth_m"], TableOptions::default());
//! for i in 0..40 {
//!     let depth = format!("1.{}", i % 5);
//!     t.push_row(&[Some("Mill Creek"), Some(&depth)]);
//!     t.push_row(&[Some("Oak Flat"), Some(&depth)]);
//! }
//! t.push_row(&[Some("MILL CREEK"), Some("1.2")]);
//! t.push_row(&[Some("Oak Flat"), Some("130")]);
//! let profile = t.finish();
//! let kinds: Vec<FindingKind> = profile.findings.iter().map(|f| f.kind).collect();
//! assert!(kinds.contains(&FindingKind::NearDuplicateLevels));
//! assert!(kinds.contains(&FindingKind::MagnitudeError));
//! //! ```

pub mod column;
pub mod dependencies;
pub mod finding;
pub mod levels;
pub mod render;
pub mod stats;
pub mod table;
pub mod types;
pub mod variants;

pub use column::{ColumnProfile, ColumnProfiler, Counts, Flag, LevelFreq, ProfileOptions};
pub use finding::{
    Finding, FindingDetail, FindingKind, FixSuggestion, MissingBasis, Severity, SuspectedMissing,
    WriteIn,
};
pub use levels::LevelGroup;
pub use render::{text_boxplot, text_histogram};
pub use stats::{Fences, NumericSummary, Quartiles};
pub use table::{TableOptions, TableProfile, TableProfiler};
pub use types::{DateOrder, InferredType};
