//! The auditor's report and the open-standard exports (`report`, `export --codebook`,
//! `export --provenance`, `export --decisions`).
//!
//! Everything here is a pure function from plain view structs to output: the HTML report
//! ([`render_html`]), CSVW metadata ([`csvw_metadata`]), a W3C PROV-JSON document
//! ([`prov_json`]) and a CSV of every cell edit ([`write_decisions_csv`]). This module never
//! opens the store, reads the clock or touches the file system; the caller fills the views and
//! hands in a `&mut dyn Write`. The views ([`ReportView`], [`CodebookView`], [`ProvView`],
//! [`DecisionRow`]) are the output contract, so store internals can change without changing
//! any file an auditor keeps.
//!
//! Every value is escaped for its target: HTML text and attributes through [`Esc`], JSON by
//! `serde_json`, CSV by RFC 4180 quoting. The HTML holds no scripts and no external
//! references: it is one file that opens offline and prints.

mod csvw;
mod decisions;
mod escape;
mod html;
mod prov;
mod svg;
mod view;

#[cfg(test)]
mod tests;

pub use csvw::{
    CodebookColumn, CodebookSource, CodebookView, CsvwDatatype, DialectView, EMEND_VOCAB,
    csvw_metadata, csvw_name,
};
pub use decisions::{
    DECISIONS_HEADER, DecisionRow, DecisionsCsvWriter, write_decisions_csv,
    write_decisions_csv_with,
};
pub use escape::Esc;
pub use html::{COLLAPSE_CELLS_AFTER, LEVELS_SHOWN, fmt_count, render_html};
pub use prov::{ProvCommit, ProvExtract, ProvSigner, ProvView, prov_json};
pub use svg::{
    Axis, HIST_HEIGHT, MARGIN_LEFT, PLOT_WIDTH, SPLIT_RATIO, fmt_num, nice_ticks, ranges_differ,
    scale, write_boxplot, write_histogram,
};
pub use view::{
    Bin, CellView, ColumnStats, ColumnView, CommitView, EvidenceView, ExtractView, FixView,
    LevelView, MarkView, NumericView, ProblemView, ReportView, SignatureStatus, VerifyView,
    VersionView,
};
