//! `export --decisions`: one CSV row per cell edit, for spreadsheets and scripts.
//!
//! The file follows RFC 4180: a header row, records ending in CRLF (§2 rule 1 and 2), fields
//! quoted with `"` when they contain a comma, a quote, CR or LF, and quotes inside a quoted
//! field doubled (§2 rules 5–7). CRLF is chosen because RFC 4180 specifies it and every
//! spreadsheet reads it; readers that expect LF accept it too.
//!
//! A missing value and empty text both write as an empty field (as `export` writes missing
//! values); the `fix_kind` column tells a `set --missing` apart. Values are written exactly as
//! stored: nothing is trimmed, and by default nothing is prefixed to defuse spreadsheet
//! formulas, because the file is evidence and must match the store byte for byte. The writer
//! counts the cells a spreadsheet would run as formulas ([`crate::values::looks_like_formula`])
//! so the caller can warn; [`write_decisions_csv_with`] with `spreadsheet_safe` defuses them
//! with a leading apostrophe instead (the file then no longer matches the store).

use std::io::{self, Write};

use serde::Serialize;

/// The header row, in column order.
pub const DECISIONS_HEADER: [&str; 11] = [
    "row",
    "column",
    "old",
    "new",
    "fix_kind",
    "reason",
    "consulted",
    "evidence_blake3",
    "commit",
    "author",
    "time",
];

/// One cell edit with the decision that made it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DecisionRow {
    /// Row key (or 1-based position).
    pub row: String,
    /// Column name.
    pub column: String,
    /// Value before the edit; `None` is missing.
    pub old: Option<String>,
    /// Value after the edit; `None` is missing.
    pub new: Option<String>,
    /// Fix kind: `set`, `set-missing`, `recode`, `missing`, ...
    pub fix_kind: String,
    /// The recorded reason.
    pub reason: String,
    /// Expert consulted, if any.
    pub consulted: Option<String>,
    /// BLAKE3 hashes of the evidence files; written space-separated (hashes hold no spaces).
    pub evidence_blake3: Vec<String>,
    /// Commit id (hex).
    pub commit: String,
    /// Author (signer name).
    pub author: String,
    /// Commit time (RFC 3339).
    pub time: String,
}

/// Writes decision rows one at a time, after the header; for exports too large to collect.
pub struct DecisionsCsvWriter<'a> {
    out: &'a mut dyn Write,
    spreadsheet_safe: bool,
    n_formulas: u64,
}

impl<'a> DecisionsCsvWriter<'a> {
    /// Writes the header row and returns a writer for the records.
    pub fn new(out: &'a mut dyn Write) -> io::Result<DecisionsCsvWriter<'a>> {
        write_record(out, DECISIONS_HEADER.iter().copied())?;
        Ok(DecisionsCsvWriter {
            out,
            spreadsheet_safe: false,
            n_formulas: 0,
        })
    }

    /// Defuse the cells a spreadsheet would run as formulas with a leading apostrophe.
    pub fn spreadsheet_safe(mut self, on: bool) -> Self {
        self.spreadsheet_safe = on;
        self
    }

    /// How many cells written so far a spreadsheet would run as formulas.
    pub fn n_formulas(&self) -> u64 {
        self.n_formulas
    }

    /// Writes one record.
    pub fn write_row(&mut self, r: &DecisionRow) -> io::Result<()> {
        let evidence = r.evidence_blake3.join(" ");
        let fields = [
            r.row.as_str(),
            r.column.as_str(),
            r.old.as_deref().unwrap_or(""),
            r.new.as_deref().unwrap_or(""),
            r.fix_kind.as_str(),
            r.reason.as_str(),
            r.consulted.as_deref().unwrap_or(""),
            evidence.as_str(),
            r.commit.as_str(),
            r.author.as_str(),
            r.time.as_str(),
        ];
        let mut shown: Vec<std::borrow::Cow<'_, str>> = Vec::with_capacity(fields.len());
        for f in fields {
            if crate::values::looks_like_formula(f) {
                self.n_formulas += 1;
                if self.spreadsheet_safe {
                    shown.push(crate::values::defuse_formula(f).into());
                    continue;
                }
            }
            shown.push(f.into());
        }
        write_record(self.out, shown.iter().map(|f| f.as_ref()))
    }
}

/// Writes `rows` as an RFC 4180 CSV with a header row and CRLF line ends.
///
/// ```
/// use emend::report::*;
/// let row = DecisionRow {
///     row: "A1".into(), column: "site".into(),
///     old: Some("Mill Craek".into()), new: Some("Mill Creek".into()),
///     fix_kind: "set".into(), reason: "typo, see \"roster\"".into(), consulted: None,
///     evidence_blake3: vec![], commit: "c0ffee".into(), author: "Ana".into(),
///     time: "2025-03-01T09:00:00Z".into(),
/// };
/// let mut csv = Vec::new();
/// write_decisions_csv(&[row], &mut csv).unwrap();
/// let csv = String::from_utf8(csv).unwrap();
/// assert!(csv.ends_with("A1,site,Mill Craek,Mill Creek,set,\"typo, see \"\"roster\"\"\",,,c0ffee,Ana,2025-03-01T09:00:00Z\r\n"));
/// ```
pub fn write_decisions_csv(rows: &[DecisionRow], out: &mut dyn Write) -> io::Result<()> {
    write_decisions_csv_with(rows, false, out).map(|_| ())
}

/// As [`write_decisions_csv`], defusing formula-like cells when `spreadsheet_safe`; returns
/// how many cells a spreadsheet would run as formulas (defused or not).
pub fn write_decisions_csv_with(
    rows: &[DecisionRow],
    spreadsheet_safe: bool,
    out: &mut dyn Write,
) -> io::Result<u64> {
    let mut w = DecisionsCsvWriter::new(out)?.spreadsheet_safe(spreadsheet_safe);
    for r in rows {
        w.write_row(r)?;
    }
    Ok(w.n_formulas())
}

fn write_record<'f>(out: &mut dyn Write, fields: impl Iterator<Item = &'f str>) -> io::Result<()> {
    for (i, field) in fields.enumerate() {
        if i > 0 {
            out.write_all(b",")?;
        }
        if field.contains([',', '"', '\r', '\n']) {
            out.write_all(b"\"")?;
            out.write_all(field.replace('"', "\"\"").as_bytes())?;
            out.write_all(b"\"")?;
        } else {
            out.write_all(field.as_bytes())?;
        }
    }
    out.write_all(b"\r\n")
}
