//! `export --codebook`: CSVW metadata describing an exported CSV.
//!
//! The output is a table description in the JSON form of the W3C "Metadata Vocabulary for
//! Tabular Data" (Recommendation, 17 December 2015). Two rules of that Recommendation shape it:
//!
//! - The `@context` may be the CSVW context IRI alone, or an array of that IRI and an object
//!   holding only `@base` and/or `@language` (§5.2). A metadata document may not add prefixes,
//!   so emend's own properties are written as *absolute IRIs* under [`EMEND_VOCAB`]
//!   (e.g. `"urn:emend:vocab#distrusted"`), which §5.8 "Common Properties" allows.
//! - Column `name`s must be usable as URI-template variables and must not start with `_`
//!   (§5.6); [`csvw_name`] percent-encodes any other character, and `titles` keep the header
//!   exactly as written.
//!
//! The dialect states `trim: false` explicitly, because the Recommendation contradicts itself
//! on the default (§5.9 prose says `true`, its printed default dialect says `false`), and emend
//! never trims values.

use serde::Serialize;
use serde_json::{Map, Value, json};

/// The IRI emend's own CSVW properties live under.
pub const EMEND_VOCAB: &str = "urn:emend:vocab#";

/// The CSVW datatypes emend writes (built-in datatype names of §5.11.1).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum CsvwDatatype {
    /// `integer` (xsd:integer).
    Integer,
    /// `decimal` (xsd:decimal).
    Decimal,
    /// `date` (xsd:date, ISO 8601 `YYYY-MM-DD`).
    Date,
    /// `boolean` (xsd:boolean).
    Boolean,
    /// `string` (xsd:string).
    String,
}

impl CsvwDatatype {
    /// The datatype's name as written in the metadata.
    pub fn name(self) -> &'static str {
        match self {
            CsvwDatatype::Integer => "integer",
            CsvwDatatype::Decimal => "decimal",
            CsvwDatatype::Date => "date",
            CsvwDatatype::Boolean => "boolean",
            CsvwDatatype::String => "string",
        }
    }

    /// Maps an inferred column type (integer, decimal, date, boolean, text) to a datatype;
    /// anything unknown is `string`.
    pub fn from_inferred(inferred: &str) -> CsvwDatatype {
        match inferred {
            "integer" => CsvwDatatype::Integer,
            "decimal" => CsvwDatatype::Decimal,
            "date" => CsvwDatatype::Date,
            "boolean" => CsvwDatatype::Boolean,
            _ => CsvwDatatype::String,
        }
    }
}

/// What the codebook describes: one exported CSV file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CodebookView {
    /// URL of the CSV, usually its file name relative to the metadata file.
    pub csv_url: String,
    /// Title (`dc:title`).
    pub title: String,
    /// Free-text description (`dc:description`), if any.
    pub description: Option<String>,
    /// Key column names (as in the header); empty when rows are identified by position.
    pub primary_key: Vec<String>,
    /// Columns, in file order.
    pub columns: Vec<CodebookColumn>,
    /// How the CSV is written.
    pub dialect: DialectView,
    /// Where the data came from, recorded under emend's vocabulary.
    pub source: Option<CodebookSource>,
}

/// One column of the exported CSV.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CodebookColumn {
    /// Header text as written in the CSV.
    pub name: String,
    /// Datatype.
    pub datatype: CsvwDatatype,
    /// Strings that mean "no value" in the exported file; an empty list means `[""]`.
    pub null_values: Vec<String>,
    /// Why the column is distrusted, when it is (and was exported anyway).
    pub distrusted_reason: Option<String>,
    /// Missing-value codes declared for the column in emend (e.g. `-9`).
    pub missing_codes: Vec<String>,
    /// Free-text description (`dc:description`), if any.
    pub description: Option<String>,
}

/// The CSV dialect of the exported file.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DialectView {
    /// Field delimiter.
    pub delimiter: char,
    /// Whether the first line is a header (always true for emend exports).
    pub header: bool,
    /// Character encoding, e.g. `utf-8`.
    pub encoding: String,
    /// Line terminator written, e.g. `"\r\n"`.
    pub line_terminator: String,
}

impl Default for DialectView {
    /// The CSVW defaults of §5.9 for delimiter, header and encoding, with CRLF lines.
    fn default() -> DialectView {
        DialectView {
            delimiter: ',',
            header: true,
            encoding: "utf-8".to_string(),
            line_terminator: "\r\n".to_string(),
        }
    }
}

/// Where the exported data came from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CodebookSource {
    /// Table name in the store.
    pub table: String,
    /// BLAKE3 hash of the raw extract.
    pub extract_blake3: String,
    /// Commit id of the exported version.
    pub version_commit: String,
    /// Canonical hash of the exported version.
    pub version_hash: String,
}

/// Percent-encodes a header into a CSVW column `name` (§5.6: URI-template variable
/// characters only, no leading `_`). Letters, digits and `_` stay; every other byte of the
/// UTF-8 text becomes `%XX`.
///
/// ```
/// use emend::report::csvw_name;
/// assert_eq!(csvw_name("flow_m3s"), "flow_m3s");
/// assert_eq!(csvw_name("Flow (m³/s)"), "Flow%20%28m%C2%B3%2Fs%29");
/// assert_eq!(csvw_name("_row"), "%5Frow");
/// ```
pub fn csvw_name(header: &str) -> String {
    let mut s = String::with_capacity(header.len());
    for (i, b) in header.bytes().enumerate() {
        let keep = b.is_ascii_alphanumeric() || (b == b'_' && i > 0);
        if keep {
            s.push(b as char);
        } else {
            s.push_str(&format!("%{b:02X}"));
        }
    }
    s
}

fn vocab(term: &str) -> String {
    format!("{EMEND_VOCAB}{term}")
}

/// Builds the CSVW table description for `view`.
///
/// ```
/// use emend::report::*;
/// let view = CodebookView {
///     csv_url: "samples.csv".into(),
///     title: "River samples".into(),
///     description: None,
///     primary_key: vec!["sample_id".into()],
///     columns: vec![CodebookColumn {
///         name: "sample_id".into(), datatype: CsvwDatatype::String, null_values: vec![],
///         distrusted_reason: None, missing_codes: vec![], description: None,
///     }],
///     dialect: DialectView::default(),
///     source: None,
/// };
/// let meta = csvw_metadata(&view);
/// assert_eq!(meta["url"], "samples.csv");
/// assert_eq!(meta["tableSchema"]["primaryKey"], "sample_id");
/// ```
pub fn csvw_metadata(view: &CodebookView) -> Value {
    let mut top = Map::new();
    top.insert(
        "@context".into(),
        json!(["http://www.w3.org/ns/csvw", {"@language": "en"}]),
    );
    top.insert("url".into(), json!(view.csv_url));
    top.insert("dc:title".into(), json!(view.title));
    if let Some(d) = &view.description {
        top.insert("dc:description".into(), json!(d));
    }
    let columns: Vec<Value> = view.columns.iter().map(column).collect();
    let mut schema = Map::new();
    schema.insert("columns".into(), Value::Array(columns));
    match view.primary_key.as_slice() {
        [] => {}
        [one] => {
            schema.insert("primaryKey".into(), json!(csvw_name(one)));
        }
        many => {
            schema.insert(
                "primaryKey".into(),
                json!(many.iter().map(|k| csvw_name(k)).collect::<Vec<_>>()),
            );
        }
    }
    top.insert("tableSchema".into(), Value::Object(schema));
    top.insert(
        "dialect".into(),
        json!({
            "delimiter": view.dialect.delimiter.to_string(),
            "header": view.dialect.header,
            "encoding": view.dialect.encoding,
            "doubleQuote": true,
            "quoteChar": "\"",
            "lineTerminators": [view.dialect.line_terminator],
            "trim": false,
        }),
    );
    if let Some(src) = &view.source {
        top.insert(vocab("table"), json!(src.table));
        top.insert(vocab("extractBlake3"), json!(src.extract_blake3));
        top.insert(vocab("versionCommit"), json!(src.version_commit));
        top.insert(vocab("versionHash"), json!(src.version_hash));
    }
    Value::Object(top)
}

fn column(c: &CodebookColumn) -> Value {
    let mut m = Map::new();
    m.insert("name".into(), json!(csvw_name(&c.name)));
    m.insert("titles".into(), json!(c.name));
    m.insert("datatype".into(), json!(c.datatype.name()));
    let nulls: Vec<&str> = if c.null_values.is_empty() {
        vec![""]
    } else {
        c.null_values.iter().map(String::as_str).collect()
    };
    m.insert("null".into(), json!(nulls));
    if let Some(d) = &c.description {
        m.insert("dc:description".into(), json!(d));
    }
    if let Some(why) = &c.distrusted_reason {
        m.insert(vocab("distrusted"), json!(why));
    }
    if !c.missing_codes.is_empty() {
        m.insert(vocab("missingCodes"), json!(c.missing_codes));
    }
    Value::Object(m)
}
