//! Plain view structs that the report and the exports are rendered from.
//!
//! These types are the contract between the store and the renderers: the CLI fills them from the
//! store, the renderers in this module turn them into HTML, CSVW, PROV-JSON or CSV. They hold
//! only plain data (strings, numbers, vectors), so internal types can change without changing
//! any output. Nothing here is escaped yet: escaping is the renderer's job.

use serde::Serialize;

/// Everything the auditor's HTML report shows, for one table at one version.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReportView {
    /// Document title, e.g. `"Audit report: samples"`.
    pub title: String,
    /// Name of the table the report is about.
    pub table: String,
    /// When the report was generated (RFC 3339); passed in, never read from the clock here.
    pub generated_at: String,
    /// The raw extract this version is built on.
    pub extract: ExtractView,
    /// The version the report describes.
    pub version: VersionView,
    /// The outcome of `verify` at the time of the report.
    pub verify: VerifyView,
    /// Every commit up to this version, oldest first.
    pub commits: Vec<CommitView>,
    /// Distinct cells whose value at this version differs from the extract's, net of cells
    /// changed twice or changed back.
    pub cells_changed: u64,
    /// Values kept on purpose at this version (row and column, with the reason).
    pub kept: Vec<MarkView>,
    /// Notes for review at this version.
    pub noted: Vec<MarkView>,
    /// Decisions owed: carried conflicts still open, and those deferred (one line each).
    pub conflicts: Vec<String>,
    /// Rows excluded at this version, with reasons.
    pub excluded_rows: Vec<MarkView>,
    /// Columns distrusted at this version, with reasons.
    pub distrusted_columns: Vec<MarkView>,
    /// Per-column statistics before (raw extract) and after (this version).
    pub columns: Vec<ColumnView>,
    /// Profile findings and rule failures still present at this version.
    pub open_problems: Vec<ProblemView>,
}

/// The raw extract as received.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExtractView {
    /// File name the extract was ingested from.
    pub file_name: String,
    /// BLAKE3 hash of the whole file (hex).
    pub blake3: String,
    /// Size of the file in bytes.
    pub n_bytes: u64,
    /// Number of data rows (header excluded).
    pub n_rows: u64,
    /// Number of columns.
    pub n_columns: u64,
    /// Sequence number of the commit that ingested it.
    pub ingest_seq: u64,
}

/// The version a report describes.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VersionView {
    /// Sequence number of the commit that produced this version.
    pub seq: u64,
    /// Id (hex) of that commit.
    pub id: String,
    /// How the user named the version: a tag, `"latest"`, or the sequence number.
    pub label: String,
    /// Time of that commit (RFC 3339).
    pub time: String,
    /// Canonical hash of the table's header and cells at this version (hex).
    pub version_hash: String,
}

/// The outcome of `verify`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VerifyView {
    /// True when every check passed.
    pub intact: bool,
    /// What was checked, in a sentence, e.g. `"12 commits, 40 chunks, 3 signatures"`.
    pub checked: String,
    /// One line per problem found; empty when intact.
    pub problems: Vec<String>,
    /// A signed receipt of the store's head when the report was made (`emend receipt`), to
    /// check later with `verify --receipt`; none when no identity was at hand to sign it.
    pub receipt: Option<String>,
}

/// Whether a commit's signature verified, and against whom.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SignatureStatus {
    /// The signature verifies and the key is in the store's trusted list.
    Valid,
    /// The signature verifies, but the key is not trusted by this store.
    ValidUntrusted,
    /// The signature does not verify.
    Invalid,
}

impl SignatureStatus {
    /// A short human word for the status, as shown in the report.
    ///
    /// ```
    /// use emend::report::SignatureStatus;
    /// assert_eq!(SignatureStatus::ValidUntrusted.word(), "valid, key not trusted");
    /// ```
    pub fn word(self) -> &'static str {
        match self {
            SignatureStatus::Valid => "valid",
            SignatureStatus::ValidUntrusted => "valid, key not trusted",
            SignatureStatus::Invalid => "INVALID",
        }
    }

    /// A stable machine name (`valid`, `valid_untrusted`, `invalid`), as in the JSON exports.
    pub fn code(self) -> &'static str {
        match self {
            SignatureStatus::Valid => "valid",
            SignatureStatus::ValidUntrusted => "valid_untrusted",
            SignatureStatus::Invalid => "invalid",
        }
    }
}

/// One commit in the history.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CommitView {
    /// Sequence number in the store.
    pub seq: u64,
    /// Commit id (hex).
    pub id: String,
    /// Signer's name.
    pub author: String,
    /// Signer's e-mail, when known.
    pub email: Option<String>,
    /// Fingerprint of the signing key.
    pub fingerprint: String,
    /// Signature check result.
    pub signature: SignatureStatus,
    /// Commit time (RFC 3339).
    pub time: String,
    /// Commit message.
    pub message: String,
    /// What kind of commit: `"ingest"` or `"fixes"`.
    pub kind: String,
    /// For an extract: its receipt (file, rows, columns, BLAKE3); for a tag or a change of
    /// trust: what it says.
    pub summary: Option<String>,
    /// The fixes in this commit, in the order they were recorded.
    pub fixes: Vec<FixView>,
}

/// One recorded fix.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FixView {
    /// Fix kind: `set`, `recode`, `missing`, `exclude`, `distrust`.
    pub kind: String,
    /// One line saying what the fix does, e.g. `"recode site: 'Mill Craek' -> 'Mill Creek'"`.
    pub description: String,
    /// Where the fix came from and went: carried from an earlier extract's commit, carried on
    /// to a later extract, or not carried past its own extract.
    pub carried: Option<String>,
    /// The mandatory reason.
    pub why: String,
    /// The expert consulted, if any.
    pub consulted: Option<String>,
    /// Evidence files attached to the fix.
    pub evidence: Vec<EvidenceView>,
    /// How many cells the fix changed in total.
    pub n_cells: u64,
    /// The changed cells; the caller may pass only the first few (see `n_cells`).
    pub cells: Vec<CellView>,
}

/// An evidence file attached to a fix.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EvidenceView {
    /// File name as attached.
    pub name: String,
    /// BLAKE3 hash of the file (hex).
    pub blake3: String,
    /// Size in bytes.
    pub n_bytes: u64,
}

/// One changed cell. `None` is a missing value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CellView {
    /// Row key (or 1-based position when the table has no key).
    pub row: String,
    /// Column name.
    pub column: String,
    /// Value before the fix.
    pub old: Option<String>,
    /// Value after the fix.
    pub new: Option<String>,
}

/// An excluded row or a distrusted column.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarkView {
    /// Row key or column name.
    pub target: String,
    /// The reason recorded with the fix.
    pub why: String,
    /// Sequence number of the commit that made the mark.
    pub seq: u64,
}

/// One column, before and after cleaning.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ColumnView {
    /// Column name.
    pub name: String,
    /// Inferred type: integer, decimal, date, boolean or text.
    pub inferred: String,
    /// Whether the column is distrusted at this version.
    pub distrusted: bool,
    /// What the cleaning changed in it, in words: cells changed, by which fixes.
    pub cleaning: String,
    /// Statistics of the raw extract.
    pub before: ColumnStats,
    /// Statistics at this version.
    pub after: ColumnStats,
}

/// Counts and distribution of one column at one version.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct ColumnStats {
    /// Number of cells (rows).
    pub cells: u64,
    /// Cells holding a value that is neither blank nor a declared missing code.
    pub present: u64,
    /// Blank cells.
    pub blank: u64,
    /// Cells holding a declared missing-value code.
    pub declared_missing: u64,
    /// Number of distinct present values.
    pub distinct: u64,
    /// Numeric summary, for numeric columns.
    pub numeric: Option<NumericView>,
    /// Frequency table of levels, for coded columns (most frequent first); empty otherwise.
    pub levels: Vec<LevelView>,
}

/// Numeric summary of a column (quartiles are Hyndman–Fan type 7, fences are Tukey's inner ones).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NumericView {
    /// Arithmetic mean.
    pub mean: f64,
    /// Sample standard deviation; `None` with fewer than two values.
    pub std_dev: Option<f64>,
    /// Smallest value.
    pub min: f64,
    /// First quartile.
    pub q1: f64,
    /// Median.
    pub median: f64,
    /// Third quartile.
    pub q3: f64,
    /// Largest value.
    pub max: f64,
    /// `q1 - 1.5 * IQR`.
    pub lower_inner_fence: f64,
    /// `q3 + 1.5 * IQR`.
    pub upper_inner_fence: f64,
    /// End of the lower whisker: the smallest value at or above the lower fence.
    pub lower_whisker: f64,
    /// End of the upper whisker: the largest value at or below the upper fence.
    pub upper_whisker: f64,
    /// Values outside the inner fences.
    pub outliers: Vec<f64>,
    /// Histogram bins, in increasing order.
    pub histogram: Vec<Bin>,
}

/// One histogram bin, `[lo, hi)` (the last bin includes `hi`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Bin {
    /// Lower edge.
    pub lo: f64,
    /// Upper edge.
    pub hi: f64,
    /// Number of values in the bin.
    pub count: u64,
}

/// One level of a coded column and how often it occurs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LevelView {
    /// The level as written.
    pub value: String,
    /// Number of cells holding it.
    pub count: u64,
}

/// A problem still present at the reported version.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProblemView {
    /// Column the problem is in (empty for table-wide problems).
    pub column: String,
    /// Severity word, e.g. `error`, `warning`, `info`.
    pub severity: String,
    /// What is wrong, in a sentence.
    pub message: String,
    /// Where it came from: `"profile"` or `"rules"`.
    pub source: String,
}
