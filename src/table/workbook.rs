//! Workbooks (`.xlsx`, `.ods`) without reading them: recognising one from its first bytes, cell
//! references, and the notes ingest makes on what a sheet holds that a table cannot. Reading a
//! sheet's cells is `table::sheet` (the `xlsx` feature).

/// The spreadsheet name of a 0-based column: `A`, …, `Z`, `AA`, ….
pub fn column_name(col: u32) -> String {
    let mut n = col as u64 + 1;
    let mut name = Vec::new();
    while n > 0 {
        let r = ((n - 1) % 26) as u8;
        name.push(b'A' + r);
        n = (n - 1) / 26;
    }
    name.reverse();
    String::from_utf8(name).expect("column letters are ASCII")
}

/// A cell's spreadsheet reference (`B7`) from 0-based row and column.
pub fn cell_ref(row: u32, col: u32) -> String {
    format!("{}{}", column_name(col), row + 1)
}

/// What the first bytes of a file say it is, when it is not text.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sniffed {
    /// A zip archive holding an OpenDocument spreadsheet.
    Ods,
    /// Any other zip archive: read as Office Open XML (`.xlsx`).
    Xlsx,
    /// An OLE compound file: an old binary `.xls`, or a password-protected `.xlsx` (which is
    /// stored encrypted inside such a file).
    Compound,
}

/// Recognise a workbook from a file's first bytes (at least the first 100 for `.ods`).
pub fn sniff(head: &[u8]) -> Option<Sniffed> {
    const OLE: [u8; 8] = [0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1];
    if head.starts_with(&OLE) {
        return Some(Sniffed::Compound);
    }
    if head.starts_with(b"PK\x03\x04") {
        // OpenDocument puts an uncompressed `mimetype` entry first.
        let window = &head[..head.len().min(200)];
        let ods = b"application/vnd.oasis.opendocument.spreadsheet";
        if window.windows(ods.len()).any(|w| w == ods) {
            return Some(Sniffed::Ods);
        }
        return Some(Sniffed::Xlsx);
    }
    None
}

/// A remark on what the sheet holds that its table cannot, made at ingest.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct WorkbookNote {
    /// A short name: `formulas`, `merged-cells`, `hidden-rows`, `hidden-columns`, `comments`,
    /// `rows-above-header`, `hidden-sheet`.
    pub kind: &'static str,
    /// How many there are.
    pub count: u64,
    /// The sentence shown to the user, naming the first few cells.
    pub message: String,
}

/// How a sheet is chosen.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SheetChoice {
    /// The first sheet.
    First,
    /// By name, as the workbook spells it.
    Name(String),
    /// By 0-based position (what a stored extract records).
    Index(u32),
}
