//! Plain data: rows, fixes, cell edits, commit bodies and dialects. No I/O.
//!
//! A commit body is encoded canonically with postcard (a frozen wire format); every collection in
//! a hashed struct is a `Vec` in a defined order, never a hash map, so the same body always gives
//! the same bytes and so the same id.

pub mod batch;
pub mod edit;
mod wire;

pub use wire::CellFilter;

use crate::hash::{BlobId, CommitId, Digest, VersionHash};
pub use batch::RowBatch;
use edit::{Rows, Transform};
use serde::{Deserialize, Serialize};
use std::fmt;

/// The version of the commit body format written by this build.
pub const BODY_FORMAT: u32 = 2;

/// Separates the row from the column in the target of a mark on one cell (a kept value, a
/// note on a cell).
pub const CELL_SEPARATOR: char = '\u{1e}';

/// The target of a mark on one cell: the row id, [`CELL_SEPARATOR`], the column.
pub fn cell_target(row: &str, column: &str) -> String {
    format!("{row}{CELL_SEPARATOR}{column}")
}

/// Separates the values of a composite key inside a [`RowId`].
pub const KEY_SEPARATOR: char = '\u{1f}';

/// The identity of a row: its key value (composite keys joined by [`KEY_SEPARATOR`]) or, for a
/// table without a key, its 1-based position in the extract as decimal text.
#[derive(Clone, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
pub struct RowId(pub String);

impl RowId {
    /// The canonical text stored in the index.
    pub fn as_str(&self) -> &str {
        &self.0
    }

    /// The row id of a keyed row from its key values.
    pub fn from_key_values<'a>(values: impl IntoIterator<Item = &'a str>) -> Self {
        let mut out = String::new();
        for (i, v) in values.into_iter().enumerate() {
            if i > 0 {
                out.push(KEY_SEPARATOR);
            }
            out.push_str(v);
        }
        RowId(out)
    }

    /// The row id of a keyless row from its 1-based position.
    pub fn from_position(pos: u64) -> Self {
        RowId(pos.to_string())
    }

    /// Parse what a user typed: composite key values are separated by commas.
    pub fn parse_user(text: &str, n_key_columns: usize) -> Self {
        if n_key_columns > 1 {
            RowId(text.replace(',', &KEY_SEPARATOR.to_string()))
        } else {
            RowId(text.to_string())
        }
    }
}

impl fmt::Display for RowId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0.replace(KEY_SEPARATOR, ","))
    }
}

impl fmt::Debug for RowId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "RowId({self})")
    }
}

/// A legacy single-byte encoding or UTF-8.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum TextEncoding {
    /// UTF-8, with or without a byte-order mark.
    Utf8,
    /// Windows code page 1252 (Western European).
    Windows1252,
    /// ISO 8859-1: each byte is the code point of the same number.
    Latin1,
    /// Not text at all: a workbook, whose cells are one sheet's values as canonical text
    /// (`table::workbook`). Added at the end (issue 18), so every earlier body still decodes.
    Workbook(WorkbookSheet),
}

/// Which workbook file format an extract is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum WorkbookFormat {
    /// Office Open XML (`.xlsx`).
    Xlsx,
    /// OpenDocument spreadsheet (`.ods`).
    Ods,
}

/// The sheet of a workbook extract that is the table, and where its header is: what a rebuild
/// needs to read the same cells back from the stored bytes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct WorkbookSheet {
    /// The file format.
    pub format: WorkbookFormat,
    /// The sheet's 0-based position among the workbook's sheets (the bytes never change, so
    /// the position always names the same sheet).
    pub sheet: u32,
    /// The header's 1-based row number in the sheet.
    pub header_row: u32,
}

impl TextEncoding {
    /// Parse a user-facing encoding name.
    pub fn parse(name: &str) -> Option<Self> {
        match name.to_ascii_lowercase().replace('_', "-").as_str() {
            "utf-8" | "utf8" => Some(TextEncoding::Utf8),
            "windows-1252" | "cp1252" | "win-1252" => Some(TextEncoding::Windows1252),
            "latin-1" | "latin1" | "iso-8859-1" | "iso8859-1" => Some(TextEncoding::Latin1),
            _ => None,
        }
    }

    /// The canonical name.
    pub fn name(&self) -> &'static str {
        match self {
            TextEncoding::Utf8 => "utf-8",
            TextEncoding::Windows1252 => "windows-1252",
            TextEncoding::Latin1 => "latin-1",
            TextEncoding::Workbook(WorkbookSheet {
                format: WorkbookFormat::Xlsx,
                ..
            }) => "xlsx",
            TextEncoding::Workbook(WorkbookSheet {
                format: WorkbookFormat::Ods,
                ..
            }) => "ods",
        }
    }
}

/// How an extract is written: what export reproduces by default.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Dialect {
    /// Field delimiter byte.
    pub delimiter: u8,
    /// Records end with CR LF (else LF).
    pub crlf: bool,
    /// The file starts with a UTF-8 byte-order mark.
    pub bom: bool,
    /// Every header field was quoted, so export quotes every field.
    pub quote_all: bool,
    /// The extract's text encoding.
    pub encoding: TextEncoding,
}

impl Default for Dialect {
    fn default() -> Self {
        Dialect {
            delimiter: b',',
            crlf: false,
            bom: false,
            quote_all: false,
            encoding: TextEncoding::Utf8,
        }
    }
}

/// A signer as named inside a commit body.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Author {
    /// Display name.
    pub name: String,
    /// E-mail, when given.
    pub email: Option<String>,
    /// Ed25519 public key.
    pub key: [u8; 32],
}

/// A file attached to a fix, stored content-addressed.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Evidence {
    /// The file name as given (no folders).
    pub name: String,
    /// BLAKE3 of the file's bytes.
    pub blob: BlobId,
    /// Size in bytes.
    pub n_bytes: u64,
}

/// What one fix does.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum FixAction {
    /// Set one cell to a value, or to missing when `value` is `None`.
    Set {
        /// Row.
        row: RowId,
        /// Column name.
        column: String,
        /// New value.
        value: Option<String>,
    },
    /// Replace exact values across a column.
    Recode {
        /// Column name.
        column: String,
        /// (from, to) pairs, applied to each cell once, first match wins.
        pairs: Vec<(String, String)>,
    },
    /// Declare values of a column to be missing-value codes; matching cells become missing.
    Missing {
        /// Column name.
        column: String,
        /// The codes.
        codes: Vec<String>,
    },
    /// Leave a row out of the cleaned data.
    Exclude {
        /// Row.
        row: RowId,
    },
    /// Mark a column as not to be trusted; export leaves it out.
    Distrust {
        /// Column name.
        column: String,
    },
    /// Adopt a rules file (stored content-addressed) that `check` applies from this commit on.
    Rules {
        /// The file name as given (no folders).
        file_name: String,
        /// BLAKE3 of the file.
        blob: BlobId,
        /// Size in bytes.
        n_bytes: u64,
    },
    /// Change one column's cells in the chosen rows by a transform (a value, missing, a
    /// number or text transform).
    Edit {
        /// Column name.
        column: String,
        /// The rows.
        rows: Rows,
        /// How each chosen cell changes.
        transform: Transform,
    },
    /// Leave the chosen rows out of the cleaned data. `rows` is how they were chosen (carried
    /// to the next extract); `resolved` lists the rows, filled when the fix is committed.
    ExcludeRows {
        /// How the rows were chosen.
        rows: Rows,
        /// The rows excluded, in extract order.
        resolved: Vec<RowId>,
    },
    /// Keep the values of one column in the chosen rows as they are, on purpose: the
    /// findings about them are answered.
    Keep {
        /// Column name.
        column: String,
        /// The rows.
        rows: Rows,
        /// The rows, filled when the fix is committed.
        resolved: Vec<RowId>,
    },
    /// A flag for review on cells of a column, or on whole rows (no column); changes nothing.
    Note {
        /// Column name, or none for whole rows.
        column: Option<String>,
        /// The rows.
        rows: Rows,
        /// The rows, filled when the fix is committed.
        resolved: Vec<RowId>,
    },
    /// Reverse one committed fix: its cells go back to the values it replaced (where they
    /// still hold its values), its exclusions, distrust, kept values and notes end.
    Withdraw {
        /// The commit that holds the fix.
        seq: u64,
        /// The fix's 1-based number in that commit (as `log` shows it, `7.2`).
        fix: u64,
    },
}

impl FixAction {
    /// A short lowercase name of the kind of fix.
    pub fn kind(&self) -> &'static str {
        match self {
            FixAction::Set { .. } => "set",
            FixAction::Recode { .. } => "recode",
            FixAction::Missing { .. } => "missing",
            FixAction::Exclude { .. } => "exclude",
            FixAction::Distrust { .. } => "distrust",
            FixAction::Rules { .. } => "rules",
            FixAction::Edit { .. } => "edit",
            FixAction::ExcludeRows { .. } => "exclude",
            FixAction::Keep { .. } => "keep",
            FixAction::Note { .. } => "note",
            FixAction::Withdraw { .. } => "withdraw",
        }
    }

    /// How the fix chooses its rows, for the fixes that do (edits, exclusions of chosen
    /// rows, keeps and notes).
    pub fn rows(&self) -> Option<&Rows> {
        match self {
            FixAction::Edit { rows, .. }
            | FixAction::ExcludeRows { rows, .. }
            | FixAction::Keep { rows, .. }
            | FixAction::Note { rows, .. } => Some(rows),
            _ => None,
        }
    }

    /// The column this fix names, if any.
    pub fn column(&self) -> Option<&str> {
        match self {
            FixAction::Set { column, .. }
            | FixAction::Recode { column, .. }
            | FixAction::Missing { column, .. }
            | FixAction::Distrust { column }
            | FixAction::Edit { column, .. }
            | FixAction::Keep { column, .. } => Some(column),
            FixAction::Note { column, .. } => column.as_deref(),
            FixAction::Exclude { .. }
            | FixAction::Rules { .. }
            | FixAction::ExcludeRows { .. }
            | FixAction::Withdraw { .. } => None,
        }
    }

    /// One line for people.
    pub fn describe(&self) -> String {
        let show = |v: &Option<String>| match v {
            Some(v) => format!("'{v}'"),
            None => "missing".to_string(),
        };
        match self {
            FixAction::Set { row, column, value } => {
                format!("set {row} {column} to {}", show(value))
            }
            FixAction::Recode { column, pairs } => {
                let list: Vec<String> = pairs
                    .iter()
                    .take(3)
                    .map(|(a, b)| format!("'{a}' -> '{b}'"))
                    .collect();
                let more = if pairs.len() > 3 {
                    format!(" and {} more", pairs.len() - 3)
                } else {
                    String::new()
                };
                format!("recode {column}: {}{more}", list.join(", "))
            }
            FixAction::Missing { column, codes } => {
                format!("missing codes for {column}: {}", codes.join(", "))
            }
            FixAction::Exclude { row } => format!("exclude row {row}"),
            FixAction::Distrust { column } => format!("distrust column {column}"),
            FixAction::Rules {
                file_name, blob, ..
            } => {
                format!("adopt rules file {file_name} ({})", blob.short())
            }
            FixAction::Edit {
                column,
                rows,
                transform,
            } => format!("{} in {rows}", transform.phrase(column)),
            FixAction::ExcludeRows { rows, resolved } => {
                format!("exclude {rows}{}", counted(resolved))
            }
            FixAction::Keep {
                column,
                rows,
                resolved,
            } => format!("keep {column} as it is in {rows}{}", counted(resolved)),
            FixAction::Note {
                column,
                rows,
                resolved,
            } => match column {
                Some(c) => format!("note on {c} in {rows}{}", counted(resolved)),
                None => format!("note on {rows}{}", counted(resolved)),
            },
            FixAction::Withdraw { seq, fix } => format!("withdraw fix {seq}.{fix}"),
        }
    }
}

fn counted(resolved: &[RowId]) -> String {
    match resolved.len() {
        0 => String::new(),
        n => format!(" ({})", quantity(n as u64, "row", "rows")),
    }
}

/// `1 cell`, `2 cells`: a count with its noun in the right number.
pub fn quantity(n: u64, one: &str, many: &str) -> String {
    if n == 1 {
        format!("1 {one}")
    } else {
        format!("{n} {many}")
    }
}

/// One recorded change with its reason.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Fix {
    /// The table it applies to.
    pub table: String,
    /// What it does.
    pub action: FixAction,
    /// Why (never empty).
    pub why: String,
    /// Attached files.
    pub evidence: Vec<Evidence>,
    /// The expert consulted, if any.
    pub consulted: Option<String>,
    /// For a fix carried forward from an earlier extract: the commits it came from, oldest
    /// first (empty for a fix made directly).
    pub origins: Vec<Origin>,
}

/// A commit a carried fix came from.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Origin {
    /// The commit's sequence number.
    pub seq: u64,
    /// The commit's id.
    pub id: CommitId,
    /// The index of the fix within that commit.
    pub fix_idx: u64,
}

/// Who recorded a pending fix: the key and name of the identity in use then.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Recorder {
    /// The Ed25519 public key.
    pub key: [u8; 32],
    /// The identity's name.
    pub name: String,
}

/// A carried fix that met cells changed at source to something else: not applied, kept open
/// until the analyst decides (apply it anyway, keep the source value, set another, or defer).
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Conflict {
    /// The fix as it would be carried (rows mapped to the new extract, with its origins).
    pub fix: Fix,
    /// The cells that conflict.
    pub cells: Vec<ConflictCell>,
}

/// One conflicting cell: the value the fix replaced, the value it set, the value now.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ConflictCell {
    /// Row (in the new extract).
    pub row: RowId,
    /// Column.
    pub column: String,
    /// The value the fix replaced on the earlier extract.
    pub was: Option<String>,
    /// The value the fix set.
    pub fixed: Option<String>,
    /// The value in the new extract.
    pub now: Option<String>,
}

/// How many distinct cells a list of fix records changes, net: a cell set twice counts once,
/// and a cell changed and changed back counts not at all.
pub fn net_cells(records: &[FixRecord]) -> u64 {
    // Per cell: the value before the first edit and after the last.
    type Ends<'a> = (&'a Option<String>, &'a Option<String>);
    let mut first_last: std::collections::HashMap<(&RowId, &str), Ends<'_>> =
        std::collections::HashMap::new();
    for e in records.iter().flat_map(|r| &r.edits) {
        first_last
            .entry((&e.row, e.column.as_str()))
            .and_modify(|(_, last)| *last = &e.new)
            .or_insert((&e.old, &e.new));
    }
    first_last.values().filter(|(old, new)| old != new).count() as u64
}

/// One cell changed by a fix, with the value before and after. `None` is missing.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct CellEdit {
    /// Row.
    pub row: RowId,
    /// Column name.
    pub column: String,
    /// Value before the fix.
    pub old: Option<String>,
    /// Value after the fix.
    pub new: Option<String>,
}

/// A fix as committed: the fix and the cells it resolved to.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct FixRecord {
    /// The fix.
    pub fix: Fix,
    /// The cells it changed, in row order.
    pub edits: Vec<CellEdit>,
}

/// A new extract of a table.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct IngestRecord {
    /// Table name.
    pub table: String,
    /// The extract's id (BLAKE3 of the file).
    pub extract: BlobId,
    /// The file name as given (no folders).
    pub file_name: String,
    /// File size.
    pub n_bytes: u64,
    /// Header names in order.
    pub header: Vec<String>,
    /// Key column names (empty: rows are named by position).
    pub key: Vec<String>,
    /// How the file is written.
    pub dialect: Dialect,
    /// Number of data rows.
    pub n_rows: u64,
}

/// A name given to a commit, signed like any commit.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct TagRecord {
    /// The tag name.
    pub name: String,
    /// The commit it names.
    pub target: CommitId,
    /// That commit's sequence number.
    pub target_seq: u64,
}

/// What a commit records.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Change {
    /// A new extract.
    Ingest(IngestRecord),
    /// Fixes, in the order they were recorded.
    Fixes(Vec<FixRecord>),
    /// A tag on an earlier commit; changes no table.
    Tag(TagRecord),
    /// A key the signer vouches for (key rotation, a new colleague); changes no table.
    Trust(TrustRecord),
    /// A key the signer withdraws trust from, from this commit on; changes no table.
    Revoke(RevokeRecord),
}

/// Trust withdrawn from a key by a commit signed with a trusted key: the key's commits from
/// `from_seq` on verify as untrusted (a key known to be lost since commit 12 can be revoked
/// from 12); its earlier ones keep the trust they had.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct RevokeRecord {
    /// The Ed25519 public key.
    pub key: [u8; 32],
    /// The first commit of the key's that is no longer trusted.
    pub from_seq: u64,
    /// Why trust is withdrawn.
    pub why: String,
}

/// A signing key introduced by a commit signed with an already trusted key.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct TrustRecord {
    /// The Ed25519 public key.
    pub key: [u8; 32],
    /// Its holder's name.
    pub name: String,
    /// Its holder's e-mail.
    pub email: Option<String>,
    /// Why it is trusted.
    pub why: String,
}

/// The recorded hash of a table version produced by a commit.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct TableVersion {
    /// Table.
    pub table: String,
    /// Canonical hash of header, cells and marks.
    pub hash: VersionHash,
    /// Rows in the version, excluded rows included.
    pub n_rows: u64,
}

/// The signed content of a commit.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct CommitBody {
    /// Body format version.
    pub format: u32,
    /// 1-based sequence number in the store.
    pub seq: u64,
    /// The previous commit's id.
    pub parent: Option<CommitId>,
    /// Who signed.
    pub author: Author,
    /// ISO 8601 / RFC 3339 UTC time.
    pub time: String,
    /// Commit message.
    pub message: String,
    /// What it records.
    pub change: Change,
    /// The table versions it produces.
    pub versions: Vec<TableVersion>,
}

impl CommitBody {
    /// The canonical bytes (postcard): format 1 lists every cell edit in full, format 2
    /// packs them (`wire.rs`).
    pub fn encode(&self) -> Vec<u8> {
        if self.format >= 2 {
            return wire::encode_v2(self);
        }
        postcard::to_stdvec(self).expect("commit bodies hold only serialisable plain data")
    }

    /// Decode canonical bytes of any format this build knows.
    pub fn decode(bytes: &[u8]) -> crate::Result<Self> {
        Self::decode_with(bytes, Some(&|_, _| true))
    }

    /// Decode a body without unpacking the cells its fixes changed (their `edits` come back
    /// empty for format 2 bodies): for readers of the chain, the fixes and the marks only.
    pub fn decode_without_cells(bytes: &[u8]) -> crate::Result<Self> {
        Self::decode_with(bytes, None)
    }

    /// Decode a body keeping only the cell edits whose (row id, column) `keep` accepts: for a
    /// reader after one cell or row of fixes that changed many.
    pub fn decode_cells_where(
        bytes: &[u8],
        keep: &dyn Fn(&str, &str) -> bool,
    ) -> crate::Result<Self> {
        Self::decode_with(bytes, Some(keep))
    }

    fn decode_with(bytes: &[u8], cells: Option<CellFilter<'_>>) -> crate::Result<Self> {
        // Every format begins with its number.
        let (format, _) = postcard::take_from_bytes::<u32>(bytes)?;
        match format {
            0 | 1 => {
                let mut body: CommitBody = postcard::from_bytes(bytes)?;
                if let (Some(keep), Change::Fixes(list)) = (cells, &mut body.change) {
                    for r in list {
                        r.edits.retain(|e| keep(&e.row.0, &e.column));
                    }
                }
                Ok(body)
            }
            2 => wire::decode_v2(bytes, cells),
            newer => Err(crate::Error::Corrupt(format!(
                "a commit body is in format {newer}, newer than this build reads ({BODY_FORMAT}); use a newer emend"
            ))),
        }
    }

    /// The commit id of these bytes.
    pub fn id_of(bytes: &[u8]) -> CommitId {
        CommitId(Digest::of(bytes))
    }

    /// The tables this commit changes.
    pub fn tables(&self) -> Vec<&str> {
        match &self.change {
            Change::Ingest(r) => vec![r.table.as_str()],
            Change::Fixes(list) => {
                let mut out: Vec<&str> = Vec::new();
                for r in list {
                    if !out.contains(&r.fix.table.as_str()) {
                        out.push(&r.fix.table);
                    }
                }
                out
            }
            Change::Tag(_) | Change::Trust(_) | Change::Revoke(_) => Vec::new(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn body() -> CommitBody {
        CommitBody {
            format: BODY_FORMAT,
            seq: 2,
            parent: Some(CommitId(Digest::of(b"parent"))),
            author: Author {
                name: "Steward".into(),
                email: None,
                key: [7; 32],
            },
            time: "2026-10-01T09:00:00Z".into(),
            message: "first pass".into(),
            change: Change::Fixes(vec![FixRecord {
                fix: Fix {
                    table: "samples".into(),
                    action: FixAction::Set {
                        row: RowId("S-1".into()),
                        column: "ph".into(),
                        value: Some("7.1".into()),
                    },
                    why: "lab sheet".into(),
                    evidence: vec![],
                    consulted: None,
                    origins: vec![],
                },
                edits: vec![CellEdit {
                    row: RowId("S-1".into()),
                    column: "ph".into(),
                    old: Some("71".into()),
                    new: Some("7.1".into()),
                }],
            }]),
            versions: vec![],
        }
    }

    #[test]
    fn body_round_trips_and_encoding_is_stable() {
        let b = body();
        let bytes = b.encode();
        assert_eq!(CommitBody::decode(&bytes).unwrap(), b);
        assert_eq!(bytes, body().encode());
        let mut other = body();
        other.message.push('!');
        assert_ne!(
            CommitBody::id_of(&other.encode()),
            CommitBody::id_of(&bytes)
        );
    }

    #[test]
    fn format_one_bodies_still_decode_and_keep_their_bytes() {
        let mut b = body();
        b.format = 1;
        let bytes = postcard::to_stdvec(&b).unwrap();
        assert_eq!(b.encode(), bytes);
        assert_eq!(CommitBody::decode(&bytes).unwrap(), b);
        // Format 2 of the same body differs in bytes, not in content.
        let v2 = body();
        assert_ne!(v2.encode(), bytes);
        assert_eq!(CommitBody::decode(&v2.encode()).unwrap().change, b.change);
    }

    #[test]
    fn packed_cells_are_small_and_come_back_exact() {
        // A recode carried onto a large extract: 38,000 cells of two values, rows spread
        // through a million.
        let edits: Vec<CellEdit> = (0..38_000u64)
            .map(|i| CellEdit {
                row: RowId(format!("S{:07}", i * 26 + 3)),
                column: "site".into(),
                old: Some("Heron pool".into()),
                new: Some(
                    if i % 7 == 0 {
                        "Heron Pool"
                    } else {
                        "Heron Pool "
                    }
                    .trim()
                    .into(),
                ),
            })
            .collect();
        let mut b = body();
        let Change::Fixes(list) = &mut b.change else {
            unreachable!()
        };
        list[0].edits = edits.clone();
        let v2 = b.encode();
        let mut v1 = b.clone();
        v1.format = 1;
        let v1 = v1.encode();
        assert!(
            v2.len() * 10 < v1.len(),
            "format 2 {} bytes, format 1 {}",
            v2.len(),
            v1.len()
        );
        assert!(v2.len() < 38_000 * 4, "{} bytes for 38,000 cells", v2.len());
        assert_eq!(CommitBody::decode(&v2).unwrap(), b);
        let light = CommitBody::decode_without_cells(&v2).unwrap();
        let Change::Fixes(list) = light.change else {
            unreachable!()
        };
        assert!(list[0].edits.is_empty());
    }

    #[test]
    fn damaged_packed_cells_are_errors() {
        let bytes = body().encode();
        for i in 0..bytes.len() {
            let mut b = bytes.clone();
            b[i] ^= 0x5a;
            // Any outcome but a panic: an error, or another valid body.
            let _ = CommitBody::decode(&b);
        }
        let mut newer = bytes.clone();
        newer[0] = 9;
        assert!(CommitBody::decode(&newer).is_err());
    }

    #[test]
    fn row_ids_show_composite_keys_with_commas() {
        let r = RowId::from_key_values(["A1", "2026-10-01"]);
        assert_eq!(r.to_string(), "A1,2026-10-01");
        assert_eq!(RowId::parse_user("A1,2026-10-01", 2), r);
        assert_eq!(RowId::parse_user("A,1", 1).as_str(), "A,1");
    }

    #[test]
    fn encodings_parse() {
        assert_eq!(
            TextEncoding::parse("CP1252"),
            Some(TextEncoding::Windows1252)
        );
        assert_eq!(
            TextEncoding::parse("ISO-8859-1"),
            Some(TextEncoding::Latin1)
        );
        assert_eq!(TextEncoding::parse("ebcdic"), None);
    }
}
