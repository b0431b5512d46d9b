//! Workbooks (`.xlsx`, `.ods`) as tables: **the one definition of a sheet's cells as text**.
//!
//! Ingest and the rebuild of a version both read a workbook extract through [`SheetTable`], so
//! they agree on which cells form the table and what each one says. A cell's canonical text
//! ([`cell_text`]) is:
//!
//! - a number in its shortest round-trip decimal form, never an exponent (`0.1`, `42`, `-3.5`;
//!   negative zero is `0`);
//! - a date, time or date-time (from the cell's type, that is its number format) in ISO 8601:
//!   `2024-10-03`, `14:30:00`, `2024-10-03T14:30:00`, with `.mmm` only when the milliseconds are
//!   not zero; a duration as `PT…H…M…S`; an `.ods` date as the file writes it (already ISO 8601);
//! - a boolean as `true` or `false`;
//! - a formula as its cached value (the value the file stores beside it), by the same rules;
//! - an error as its text (`#DIV/0!`, `#N/A`);
//! - a text cell as it is, and an empty cell as empty text.
//!
//! A workbook is not streaming-friendly (the sheet XML is inside a zip archive, and cells may
//! come in any order): the chosen sheet is read into memory whole (calamine's `Range`), about
//! 48 bytes a cell plus the text. What a workbook holds that a table cannot (formulas, merged
//! cells, hidden rows and columns, comments, rows above the header) is listed as
//! [`WorkbookNote`]s, never dropped silently; the raw bytes keep all of it.

use super::workbook::{SheetChoice, Sniffed, WorkbookNote, cell_ref, column_name, sniff};
use crate::error::{Error, Result};
use crate::model::{WorkbookFormat, WorkbookSheet};
use calamine::{Data, Ods, Range, Reader as _, Xlsx};
use std::io::{Cursor, Read};
use std::ops::ControlFlow;
use std::path::Path;

/// The canonical text of one cell value, written into `out` (cleared first). See the module
/// documentation for the rules; this is the only place they are implemented.
///
/// ```
/// use calamine::Data;
/// let mut s = String::new();
/// emend::table::sheet::cell_text(&Data::Float(0.1 + 0.2), &mut s);
/// assert_eq!(s, "0.30000000000000004");
/// emend::table::sheet::cell_text(&Data::Bool(true), &mut s);
/// assert_eq!(s, "true");
/// ```
pub fn cell_text(value: &Data, out: &mut String) {
    use std::fmt::Write as _;
    out.clear();
    match value {
        Data::Empty => {}
        Data::String(s) => out.push_str(s),
        Data::Int(i) => {
            let _ = write!(out, "{i}");
        }
        Data::Float(f) => number_text(*f, out),
        Data::Bool(b) => out.push_str(if *b { "true" } else { "false" }),
        Data::Error(e) => {
            let _ = write!(out, "{e}");
        }
        Data::DateTimeIso(s) | Data::DurationIso(s) => out.push_str(s),
        Data::DateTime(d) if d.is_duration() => duration_text(d.as_f64(), out),
        Data::DateTime(d) => {
            let (y, mo, day, h, mi, s, ms) = d.to_ymd_hms_milli();
            let serial = d.as_f64();
            let has_time = (h, mi, s, ms) != (0, 0, 0, 0);
            // A serial below one day is a time of day with no date (Excel's number formats
            // such as `h:mm` on 0.5).
            if (0.0..1.0).contains(&serial) {
                time_text(h, mi, s, ms, out);
            } else {
                let _ = write!(out, "{y:04}-{mo:02}-{day:02}");
                if has_time {
                    out.push('T');
                    time_text(h, mi, s, ms, out);
                }
            }
        }
    }
}

fn number_text(f: f64, out: &mut String) {
    use std::fmt::Write as _;
    // Rust's `Display` for f64 prints the shortest digits that read back to the same value,
    // in plain decimal notation.
    if f == 0.0 {
        out.push('0');
    } else {
        let _ = write!(out, "{f}");
    }
}

fn time_text(h: u8, mi: u8, s: u8, ms: u16, out: &mut String) {
    use std::fmt::Write as _;
    let _ = write!(out, "{h:02}:{mi:02}:{s:02}");
    if ms != 0 {
        let _ = write!(out, ".{ms:03}");
    }
}

fn duration_text(days: f64, out: &mut String) {
    use std::fmt::Write as _;
    let total_ms = (days * 86_400_000.0).round() as i64;
    let sign = if total_ms < 0 { "-" } else { "" };
    let ms = total_ms.unsigned_abs();
    let (h, rest) = (ms / 3_600_000, ms % 3_600_000);
    let (mi, rest) = (rest / 60_000, rest % 60_000);
    let (s, milli) = (rest / 1000, rest % 1000);
    let _ = write!(out, "{sign}PT{h}H{mi}M{s}");
    if milli != 0 {
        let _ = write!(out, ".{milli:03}");
    }
    out.push('S');
}

enum Book<'a> {
    Xlsx(Box<Xlsx<Cursor<&'a [u8]>>>),
    Ods(Ods<Cursor<&'a [u8]>>),
}

/// An opened workbook over borrowed bytes.
pub struct Workbook<'a> {
    bytes: &'a [u8],
    format: WorkbookFormat,
    book: Book<'a>,
    path: &'a Path,
}

fn bad(path: &Path, problem: impl Into<String>, hint: impl Into<String>) -> Error {
    Error::BadWorkbook {
        path: path.to_path_buf(),
        problem: problem.into(),
        hint: hint.into(),
    }
}

const RESAVE: &str = "nothing was stored; open it in a spreadsheet program and save a copy as .xlsx (or CSV), then ingest that";

impl<'a> Workbook<'a> {
    /// Open a workbook from its bytes; `path` names it in errors.
    pub fn open(bytes: &'a [u8], path: &'a Path) -> Result<Workbook<'a>> {
        let Some(kind) = sniff(bytes) else {
            return Err(bad(path, "not a workbook (neither .xlsx nor .ods)", RESAVE));
        };
        let cursor = Cursor::new(bytes);
        let book = match kind {
            Sniffed::Ods => Book::Ods(calamine::open_workbook_from_rs(cursor).map_err(
                |e| match e {
                    calamine::OdsError::Password => bad(
                        path,
                        "the workbook is password-protected",
                        "nothing was stored; save a copy without a password and ingest that",
                    ),
                    e => bad(path, format!("not a readable .ods workbook: {e}"), RESAVE),
                },
            )?),
            Sniffed::Xlsx | Sniffed::Compound => {
                match calamine::open_workbook_from_rs::<Xlsx<_>, _>(cursor) {
                    Ok(b) => Book::Xlsx(Box::new(b)),
                    Err(calamine::XlsxError::Password) => {
                        return Err(bad(
                            path,
                            "the workbook is password-protected (encrypted)",
                            "nothing was stored; save a copy without a password and ingest that",
                        ));
                    }
                    Err(_) if kind == Sniffed::Compound => {
                        return Err(bad(
                            path,
                            "an old binary workbook (.xls), which emend does not read",
                            RESAVE,
                        ));
                    }
                    Err(e) => {
                        return Err(bad(
                            path,
                            format!("not a readable .xlsx workbook: {e}"),
                            RESAVE,
                        ));
                    }
                }
            }
        };
        let format = match kind {
            Sniffed::Ods => WorkbookFormat::Ods,
            _ => WorkbookFormat::Xlsx,
        };
        Ok(Workbook {
            bytes,
            format,
            book,
            path,
        })
    }

    /// The file format.
    pub fn format(&self) -> WorkbookFormat {
        self.format
    }

    /// Every sheet's name, in order.
    pub fn sheet_names(&self) -> Vec<String> {
        match &self.book {
            Book::Xlsx(b) => b.sheet_names(),
            Book::Ods(b) => b.sheet_names(),
        }
    }

    fn hidden(&self, idx: usize) -> bool {
        let meta = match &self.book {
            Book::Xlsx(b) => b.sheets_metadata(),
            Book::Ods(b) => b.sheets_metadata(),
        };
        meta.get(idx)
            .is_some_and(|s| s.visible != calamine::SheetVisible::Visible)
    }

    /// The sheet's position by choice, with an error that lists the sheets.
    pub fn sheet_index(&self, choice: &SheetChoice) -> Result<u32> {
        let names = self.sheet_names();
        let listed = || {
            names
                .iter()
                .map(|n| format!("'{n}'"))
                .collect::<Vec<_>>()
                .join(", ")
        };
        match choice {
            SheetChoice::First if names.is_empty() => Err(bad(
                self.path,
                "the workbook has no sheets",
                "nothing was stored",
            )),
            SheetChoice::First => Ok(0),
            SheetChoice::Name(n) => names
                .iter()
                .position(|s| s == n)
                .or_else(|| names.iter().position(|s| s.eq_ignore_ascii_case(n)))
                .map(|i| i as u32)
                .ok_or_else(|| {
                    bad(
                        self.path,
                        format!("no sheet named '{n}' (sheets: {})", listed()),
                        "nothing was stored; give --sheet with one of the names listed",
                    )
                }),
            SheetChoice::Index(i) if (*i as usize) < names.len() => Ok(*i),
            SheetChoice::Index(i) => Err(Error::Corrupt(format!(
                "{}: the stored workbook has no sheet number {}",
                self.path.display(),
                i + 1
            ))),
        }
    }

    fn range(&mut self, name: &str) -> Result<Range<Data>> {
        let path = self.path;
        match &mut self.book {
            Book::Xlsx(b) => b
                .worksheet_range(name)
                .map_err(|e| bad(path, format!("sheet '{name}' cannot be read: {e}"), RESAVE)),
            Book::Ods(b) => b
                .worksheet_range(name)
                .map_err(|e| bad(path, format!("sheet '{name}' cannot be read: {e}"), RESAVE)),
        }
    }

    fn formulas(&mut self, name: &str) -> Result<Range<String>> {
        let path = self.path;
        match &mut self.book {
            Book::Xlsx(b) => b
                .worksheet_formula(name)
                .map_err(|e| bad(path, format!("sheet '{name}' cannot be read: {e}"), RESAVE)),
            Book::Ods(b) => b
                .worksheet_formula(name)
                .map_err(|e| bad(path, format!("sheet '{name}' cannot be read: {e}"), RESAVE)),
        }
    }

    /// Read one sheet as a table. `header_row` is 1-based; `None` takes the sheet's first
    /// filled row and refuses a title block above the table. With `with_notes`, also lists
    /// what the table cannot hold (ingest does; a rebuild does not need to).
    pub fn sheet(
        &mut self,
        choice: &SheetChoice,
        header_row: Option<u32>,
        with_notes: bool,
    ) -> Result<SheetTable> {
        let idx = self.sheet_index(choice)?;
        let name = self.sheet_names()[idx as usize].clone();
        let range = self.range(&name)?;
        let layout = Layout::scan(self.path, self.bytes, self.format, &name)?;
        let mut table = SheetTable::from_range(self.path, &name, range, header_row, &layout)?;
        table.sheet = WorkbookSheet {
            format: self.format,
            sheet: idx,
            header_row: table.header_row + 1,
        };
        if with_notes {
            let formulas = self.formulas(&name)?;
            table.notes = table.notes_for(&formulas, &layout, self.hidden(idx as usize));
        }
        Ok(table)
    }
}

/// A rectangle of cells, 0-based and inclusive.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Area {
    r0: u32,
    c0: u32,
    r1: u32,
    c1: u32,
}

impl Area {
    fn name(&self) -> String {
        format!(
            "{}:{}",
            cell_ref(self.r0, self.c0),
            cell_ref(self.r1, self.c1)
        )
    }
}

/// What the sheet's XML says beyond its values: merged areas, hidden rows and columns,
/// comments. calamine reads values and formulas; these come from the parts themselves.
#[derive(Debug, Default)]
struct Layout {
    merged: Vec<Area>,
    hidden_rows: Vec<(u32, u32)>,
    hidden_cols: Vec<(u32, u32)>,
    comments: Vec<(u32, u32)>,
}

fn zip_part(bytes: &[u8], name: &str) -> Option<Vec<u8>> {
    let mut archive = zip::ZipArchive::new(Cursor::new(bytes)).ok()?;
    let mut file = archive.by_name(name).ok()?;
    let mut out = Vec::new();
    file.read_to_end(&mut out).ok()?;
    Some(out)
}

fn attr(e: &quick_xml::events::BytesStart<'_>, key: &str) -> Option<String> {
    e.attributes()
        .flatten()
        .find(|a| a.key.as_ref() == key)
        .map(|a| a.value.into_owned())
}

/// `B7` → (6, 1), 0-based.
fn parse_ref(text: &str) -> Option<(u32, u32)> {
    let split = text.find(|c: char| c.is_ascii_digit())?;
    let (letters, digits) = text.split_at(split);
    if letters.is_empty() {
        return None;
    }
    let mut col = 0u64;
    for b in letters.bytes() {
        if !b.is_ascii_alphabetic() {
            return None;
        }
        col = col * 26 + u64::from(b.to_ascii_uppercase() - b'A' + 1);
    }
    let row: u32 = digits.parse().ok()?;
    Some((row.checked_sub(1)?, u32::try_from(col - 1).ok()?))
}

/// Resolve a relationship target against the folder of the part that names it.
fn resolve(base_dir: &str, target: &str) -> String {
    if let Some(abs) = target.strip_prefix('/') {
        return abs.to_string();
    }
    let mut parts: Vec<&str> = base_dir.split('/').filter(|p| !p.is_empty()).collect();
    for p in target.split('/') {
        match p {
            ".." => {
                parts.pop();
            }
            "." | "" => {}
            p => parts.push(p),
        }
    }
    parts.join("/")
}

fn for_each_start(xml: &[u8], mut f: impl FnMut(&quick_xml::events::BytesStart<'_>, bool)) {
    let mut reader = quick_xml::Reader::from_reader(xml);
    let mut buf = Vec::new();
    loop {
        match reader.read_event_into(&mut buf) {
            Ok(quick_xml::events::Event::Start(e)) => f(&e, false),
            Ok(quick_xml::events::Event::Empty(e)) => f(&e, true),
            Ok(quick_xml::events::Event::Eof) | Err(_) => break,
            _ => {}
        }
        buf.clear();
    }
}

fn rels(bytes: &[u8], part: &str) -> Vec<(String, String, String)> {
    let mut out = Vec::new();
    if let Some(xml) = zip_part(bytes, part) {
        for_each_start(&xml, |e, _| {
            if e.local_name().as_ref() == "Relationship"
                && let (Some(id), Some(target)) = (attr(e, "Id"), attr(e, "Target"))
            {
                out.push((id, attr(e, "Type").unwrap_or_default(), target));
            }
        });
    }
    out
}

impl Layout {
    fn scan(path: &Path, bytes: &[u8], format: WorkbookFormat, sheet: &str) -> Result<Layout> {
        let _ = path;
        Ok(match format {
            WorkbookFormat::Xlsx => Layout::scan_xlsx(bytes, sheet),
            WorkbookFormat::Ods => Layout::scan_ods(bytes, sheet),
        })
    }

    fn scan_xlsx(bytes: &[u8], sheet: &str) -> Layout {
        let mut layout = Layout::default();
        // workbook.xml names each sheet's relationship; the relationships name its part.
        let mut rel_id = None;
        if let Some(xml) = zip_part(bytes, "xl/workbook.xml") {
            for_each_start(&xml, |e, _| {
                if e.local_name().as_ref() == "sheet" && attr(e, "name").as_deref() == Some(sheet) {
                    rel_id = attr(e, "r:id");
                }
            });
        }
        let Some(rel_id) = rel_id else {
            return layout;
        };
        let Some((_, _, target)) = rels(bytes, "xl/_rels/workbook.xml.rels")
            .into_iter()
            .find(|(id, _, _)| *id == rel_id)
        else {
            return layout;
        };
        let part = resolve("xl", &target);
        if let Some(xml) = zip_part(bytes, &part) {
            for_each_start(&xml, |e, _| match e.local_name().as_ref() {
                "row" => {
                    let hidden = matches!(attr(e, "hidden").as_deref(), Some("1" | "true"));
                    if hidden
                        && let Some(r) = attr(e, "r").and_then(|r| r.parse::<u32>().ok())
                        && r > 0
                    {
                        layout.hidden_rows.push((r - 1, r - 1));
                    }
                }
                "col" => {
                    let hidden = matches!(attr(e, "hidden").as_deref(), Some("1" | "true"));
                    let lo = attr(e, "min").and_then(|v| v.parse::<u32>().ok());
                    let hi = attr(e, "max").and_then(|v| v.parse::<u32>().ok());
                    if hidden
                        && let (Some(lo), Some(hi)) = (lo, hi)
                        && lo > 0
                        && hi >= lo
                    {
                        layout.hidden_cols.push((lo - 1, hi - 1));
                    }
                }
                "mergeCell" => {
                    if let Some(r) = attr(e, "ref")
                        && let Some((a, b)) = r.split_once(':')
                        && let (Some(a), Some(b)) = (parse_ref(a), parse_ref(b))
                    {
                        layout.merged.push(Area {
                            r0: a.0.min(b.0),
                            c0: a.1.min(b.1),
                            r1: a.0.max(b.0),
                            c1: a.1.max(b.1),
                        });
                    }
                }
                _ => {}
            });
        }
        let (dir, file) = part.rsplit_once('/').unwrap_or(("", part.as_str()));
        let sheet_rels = format!("{dir}/_rels/{file}.rels");
        for (_, kind, target) in rels(bytes, &sheet_rels) {
            if kind.ends_with("/comments")
                && let Some(xml) = zip_part(bytes, &resolve(dir, &target))
            {
                for_each_start(&xml, |e, _| {
                    if e.local_name().as_ref() == "comment"
                        && let Some(at) = attr(e, "ref").and_then(|r| parse_ref(&r))
                    {
                        layout.comments.push(at);
                    }
                });
            }
        }
        layout
    }

    fn scan_ods(bytes: &[u8], sheet: &str) -> Layout {
        use quick_xml::events::Event;
        let mut st = OdsScan::default();
        let Some(xml) = zip_part(bytes, "content.xml") else {
            return st.layout;
        };
        let mut reader = quick_xml::Reader::from_reader(xml.as_slice());
        let mut buf = Vec::new();
        loop {
            match reader.read_event_into(&mut buf) {
                Ok(Event::Start(e)) => {
                    if e.name().as_ref() == "table:table" {
                        st.inside = attr(&e, "table:name").as_deref() == Some(sheet);
                    } else if st.inside {
                        st.start(&e, false);
                    }
                }
                Ok(Event::Empty(e)) if st.inside => st.start(&e, true),
                Ok(Event::End(e)) => match e.name().as_ref() {
                    "table:table" if st.inside => break,
                    "table:table-row" if st.inside => {
                        st.row = st.row.saturating_add(st.row_repeat);
                    }
                    "table:table-cell" | "table:covered-table-cell" if st.inside => {
                        st.col = st.col.saturating_add(st.cell_repeat);
                        st.cell = None;
                    }
                    _ => {}
                },
                Ok(Event::Eof) | Err(_) => break,
                _ => {}
            }
            buf.clear();
        }
        st.layout
    }
}

/// The position while reading an OpenDocument sheet: rows and cells may repeat
/// (`number-rows-repeated`, `number-columns-repeated`), and an end tag moves past them.
#[derive(Default)]
struct OdsScan {
    layout: Layout,
    inside: bool,
    row: u32,
    col: u32,
    def_col: u32,
    row_repeat: u32,
    cell_repeat: u32,
    cell: Option<(u32, u32)>,
}

impl OdsScan {
    fn start(&mut self, e: &quick_xml::events::BytesStart<'_>, empty: bool) {
        let num = |k: &str| {
            attr(e, k)
                .and_then(|v| v.parse::<u32>().ok())
                .unwrap_or(1)
                .max(1)
        };
        let hidden = || attr(e, "table:visibility").is_some_and(|v| v != "visible");
        match e.name().as_ref() {
            "table:table-column" => {
                let n = num("table:number-columns-repeated");
                if hidden() {
                    let hi = self.def_col.saturating_add(n - 1);
                    self.layout.hidden_cols.push((self.def_col, hi));
                }
                self.def_col = self.def_col.saturating_add(n);
            }
            "table:table-row" => {
                let n = num("table:number-rows-repeated");
                if hidden() {
                    let hi = self.row.saturating_add(n - 1);
                    self.layout.hidden_rows.push((self.row, hi));
                }
                self.col = 0;
                if empty {
                    self.row = self.row.saturating_add(n);
                } else {
                    self.row_repeat = n;
                }
            }
            "table:table-cell" | "table:covered-table-cell" => {
                let n = num("table:number-columns-repeated");
                let rs = num("table:number-rows-spanned");
                let cs = num("table:number-columns-spanned");
                if rs > 1 || cs > 1 {
                    self.layout.merged.push(Area {
                        r0: self.row,
                        c0: self.col,
                        r1: self.row.saturating_add(rs - 1),
                        c1: self.col.saturating_add(cs - 1),
                    });
                }
                if empty {
                    self.col = self.col.saturating_add(n);
                } else {
                    self.cell = Some((self.row, self.col));
                    self.cell_repeat = n;
                }
            }
            "office:annotation" => {
                if let Some(at) = self.cell {
                    self.layout.comments.push(at);
                }
            }
            _ => {}
        }
    }
}

/// One sheet read as a table: its header and its cells as canonical text.
pub struct SheetTable {
    /// The sheet's name.
    pub name: String,
    /// Which sheet, and the header's row: what the extract's record keeps.
    pub sheet: WorkbookSheet,
    /// Column names, trimmed.
    pub header: Vec<String>,
    /// What the workbook holds that the table cannot (filled at ingest).
    pub notes: Vec<WorkbookNote>,
    range: Range<Data>,
    /// 0-based header row.
    header_row: u32,
    /// 0-based first and last column of the table.
    c0: u32,
    c1: u32,
    /// 0-based last row.
    r1: u32,
    /// 0-based first filled row of the sheet.
    first_row: u32,
}

impl SheetTable {
    fn from_range(
        path: &Path,
        name: &str,
        range: Range<Data>,
        header_row: Option<u32>,
        layout: &Layout,
    ) -> Result<SheetTable> {
        let hint_row =
            "nothing was stored; give --header-row N, the sheet row that holds the column names";
        // The bounding box of filled cells (a range may carry empty, formatted cells).
        let mut rows = (u32::MAX, 0u32);
        for (r, _, v) in range.used_cells() {
            if !matches!(v, Data::Empty) {
                let (r0, _) = range.start().unwrap_or((0, 0));
                let r = r0 + r as u32;
                rows = (rows.0.min(r), rows.1.max(r));
            }
        }
        if rows.0 == u32::MAX {
            return Err(bad(
                path,
                format!("sheet '{name}' is empty"),
                "nothing was stored; choose another sheet with --sheet NAME",
            ));
        }
        let (first_row, r1) = rows;
        let mut text = String::new();
        let filled = |r: u32, text: &mut String| -> Vec<u32> {
            let mut cols = Vec::new();
            let (_, c_start) = range.start().unwrap_or((0, 0));
            let (_, c_end) = range.end().unwrap_or((0, 0));
            for c in c_start..=c_end {
                if let Some(v) = range.get_value((r, c)) {
                    cell_text(v, text);
                    if !text.trim().is_empty() {
                        cols.push(c);
                    }
                }
            }
            cols
        };
        let hr = match header_row {
            Some(0) => {
                return Err(bad(
                    path,
                    "--header-row counts from 1",
                    "nothing was stored; give --header-row 1 for the first row",
                ));
            }
            Some(n) if n - 1 > r1 => {
                return Err(bad(
                    path,
                    format!(
                        "sheet '{name}' has no filled row {n} (its cells fill rows {} to {})",
                        first_row + 1,
                        r1 + 1
                    ),
                    hint_row,
                ));
            }
            Some(n) => n - 1,
            None => first_row,
        };
        // Columns: those filled at or below the header (a title block above may be wider).
        let mut cols = (u32::MAX, 0u32);
        let (r_start, c_start) = range.start().unwrap_or((0, 0));
        for (r, c, v) in range.used_cells() {
            let (r, c) = (r_start + r as u32, c_start + c as u32);
            if r >= hr && !matches!(v, Data::Empty) {
                cell_text(v, &mut text);
                if !text.is_empty() {
                    cols = (cols.0.min(c), cols.1.max(c));
                }
            }
        }
        let (c0, c1) = cols;
        let header_cols = filled(hr, &mut text);
        // The row with the most filled cells among the first few: where the header likely is.
        let likely = (first_row..=r1.min(first_row + 30))
            .max_by_key(|&r| (filled(r, &mut text).len(), std::cmp::Reverse(r)))
            .unwrap_or(first_row);
        if let Some(m) = layout
            .merged
            .iter()
            .find(|m| m.r0 <= hr && hr <= m.r1 && m.c1 >= c0 && m.c0 <= c1)
        {
            return Err(bad(
                path,
                format!(
                    "sheet '{name}': the header row {} has merged cells ({}), so it cannot name one column each",
                    hr + 1,
                    m.name()
                ),
                "nothing was stored; unmerge the header cells so each column has one name, or give --header-row N for the row below a multi-row header",
            ));
        }
        if header_row.is_none() && header_cols.len() <= 1 && c1 > c0 && likely != hr {
            return Err(bad(
                path,
                format!(
                    "sheet '{name}': row {} looks like a title above the table (one filled cell); the column names seem to be on row {}",
                    hr + 1,
                    likely + 1
                ),
                format!("nothing was stored; give --header-row {}", likely + 1),
            ));
        }
        let mut header = Vec::with_capacity((c1 - c0 + 1) as usize);
        let mut seen: std::collections::HashMap<String, u32> = Default::default();
        for c in c0..=c1 {
            match range.get_value((hr, c)) {
                Some(v) => cell_text(v, &mut text),
                None => text.clear(),
            }
            let h = text.trim().to_string();
            if h.is_empty() {
                let hint = if header_row.is_none() && likely != hr {
                    format!("nothing was stored; give --header-row {}", likely + 1)
                } else {
                    "nothing was stored; give every column a name in the header row, or give --header-row N".into()
                };
                return Err(bad(
                    path,
                    format!(
                        "sheet '{name}' cell {}: empty column name in the header (row {})",
                        cell_ref(hr, c),
                        hr + 1
                    ),
                    hint,
                ));
            }
            if let Some(&other) = seen.get(&h) {
                return Err(bad(
                    path,
                    format!(
                        "sheet '{name}' cell {}: duplicate column name '{h}' (also {})",
                        cell_ref(hr, c),
                        cell_ref(hr, other)
                    ),
                    "nothing was stored; give each column its own name, or give --header-row N",
                ));
            }
            seen.insert(h.clone(), c);
            header.push(h);
        }
        if hr >= r1 {
            return Err(bad(
                path,
                format!(
                    "sheet '{name}' has a header (row {}) but no data rows",
                    hr + 1
                ),
                "nothing was stored; choose the sheet that holds the data with --sheet NAME",
            ));
        }
        Ok(SheetTable {
            name: name.to_string(),
            sheet: WorkbookSheet {
                format: WorkbookFormat::Xlsx,
                sheet: 0,
                header_row: hr + 1,
            },
            header,
            notes: Vec::new(),
            range,
            header_row: hr,
            c0,
            c1,
            r1,
            first_row,
        })
    }

    /// Every data row below the header in order, as (1-based sheet row, cells as canonical
    /// text); rows with no filled cell are skipped (when the table has more than one column)
    /// and counted in the return value.
    pub fn for_each_row<E>(
        &self,
        mut f: impl FnMut(u32, &[String]) -> std::result::Result<ControlFlow<()>, E>,
    ) -> std::result::Result<u64, E> {
        let width = (self.c1 - self.c0 + 1) as usize;
        let mut cells = vec![String::new(); width];
        let mut blank = 0u64;
        for r in self.header_row + 1..=self.r1 {
            let mut any = false;
            for (i, c) in (self.c0..=self.c1).enumerate() {
                match self.range.get_value((r, c)) {
                    Some(v) => cell_text(v, &mut cells[i]),
                    None => cells[i].clear(),
                }
                any |= !cells[i].is_empty();
            }
            if !any && width > 1 {
                blank += 1;
                continue;
            }
            if f(r + 1, &cells)?.is_break() {
                break;
            }
        }
        Ok(blank)
    }

    /// The spreadsheet name of the table's `i`th column.
    pub fn column_ref(&self, i: usize) -> String {
        column_name(self.c0 + i as u32)
    }

    fn notes_for(
        &self,
        formulas: &Range<String>,
        layout: &Layout,
        hidden: bool,
    ) -> Vec<WorkbookNote> {
        let mut notes = Vec::new();
        let area = Area {
            r0: self.header_row,
            c0: self.c0,
            r1: self.r1,
            c1: self.c1,
        };
        let inside = |r: u32, c: u32| r >= area.r0 && r <= area.r1 && c >= area.c0 && c <= area.c1;
        let some = |refs: &[String], total: usize| -> String {
            let mut s = refs.iter().take(5).cloned().collect::<Vec<_>>().join(", ");
            if total > 5 {
                s.push_str(&format!(" and {} more", total - 5));
            }
            s
        };
        let mut push = |kind: &'static str, refs: Vec<String>, what: &str| {
            if !refs.is_empty() {
                notes.push(WorkbookNote {
                    kind,
                    count: refs.len() as u64,
                    message: format!("{} {what} ({})", refs.len(), some(&refs, refs.len())),
                });
            }
        };
        let (fr0, fc0) = formulas.start().unwrap_or((0, 0));
        let f_refs: Vec<String> = formulas
            .used_cells()
            .filter(|(_, _, f)| !f.is_empty())
            .map(|(r, c, _)| (fr0 + r as u32, fc0 + c as u32))
            .filter(|&(r, c)| inside(r, c))
            .map(|(r, c)| cell_ref(r, c))
            .collect();
        push(
            "formulas",
            f_refs,
            "formula cells: the table holds their cached values, not the formulas",
        );
        let merged: Vec<String> = layout
            .merged
            .iter()
            .filter(|m| m.r1 >= area.r0 && m.r0 <= area.r1 && m.c1 >= area.c0 && m.c0 <= area.c1)
            .map(Area::name)
            .collect();
        push(
            "merged-cells",
            merged,
            "merged areas: the value is in the first cell, the others are empty",
        );
        let mut hidden_rows = Vec::new();
        for &(lo, hi) in &layout.hidden_rows {
            for r in lo.max(area.r0)..=hi.min(area.r1) {
                hidden_rows.push((r + 1).to_string());
            }
        }
        push(
            "hidden-rows",
            hidden_rows,
            "hidden rows, read like any other row",
        );
        let mut hidden_cols = Vec::new();
        for &(lo, hi) in &layout.hidden_cols {
            for c in lo.max(area.c0)..=hi.min(area.c1) {
                hidden_cols.push(column_name(c));
            }
        }
        push(
            "hidden-columns",
            hidden_cols,
            "hidden columns, read like any other column",
        );
        let comments: Vec<String> = layout
            .comments
            .iter()
            .filter(|&&(r, c)| inside(r, c))
            .map(|&(r, c)| cell_ref(r, c))
            .collect();
        push(
            "comments",
            comments,
            "cell comments, which the table does not hold",
        );
        if self.header_row > self.first_row {
            let rows: Vec<String> = (self.first_row..self.header_row)
                .map(|r| (r + 1).to_string())
                .collect();
            push(
                "rows-above-header",
                rows,
                "rows above the header (a title or further header rows), not part of the table",
            );
        }
        if hidden {
            notes.push(WorkbookNote {
                kind: "hidden-sheet",
                count: 1,
                message: format!("the sheet '{}' is hidden in the workbook", self.name),
            });
        }
        notes
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check(value: Data, expected: &str) {
        let mut s = String::from("leftover");
        cell_text(&value, &mut s);
        assert_eq!(s, expected, "{value:?}");
    }

    #[test]
    fn canonical_text_of_each_kind_of_cell() {
        check(Data::Empty, "");
        check(Data::String(" Mill Creek ".into()), " Mill Creek ");
        check(Data::Int(-7), "-7");
        check(Data::Float(42.0), "42");
        check(Data::Float(-0.0), "0");
        // Shortest round trip: IEEE 754 binary64 nearest to 0.1 + 0.2 needs 17 digits.
        check(Data::Float(0.1 + 0.2), "0.30000000000000004");
        check(Data::Float(1e21), "1000000000000000000000");
        check(Data::Float(1.5e-7), "0.00000015");
        check(Data::Bool(false), "false");
        check(Data::Error(calamine::CellErrorType::Div0), "#DIV/0!");
        check(Data::Error(calamine::CellErrorType::NA), "#N/A");
        check(Data::DateTimeIso("2024-10-03".into()), "2024-10-03");
        use calamine::{ExcelDateTime, ExcelDateTimeType::*};
        // Serial 45568 is 2024-10-03 in the 1900 date system (ECMA-376 Part 1, 18.17.4.1:
        // day 1 is 1900-01-01 and the nonexistent 1900-02-29 is counted, so later serials
        // count from 1899-12-30; Python's `date(1899, 12, 30) + timedelta(45568)` agrees).
        check(
            Data::DateTime(ExcelDateTime::new(45568.0, DateTime, false)),
            "2024-10-03",
        );
        check(
            Data::DateTime(ExcelDateTime::new(45568.75, DateTime, false)),
            "2024-10-03T18:00:00",
        );
        // In the 1904 system day 0 is 1904-01-01 (ECMA-376 Part 1, 18.17.4.1).
        check(
            Data::DateTime(ExcelDateTime::new(0.0 + 1.0, DateTime, true)),
            "1904-01-02",
        );
        check(
            Data::DateTime(ExcelDateTime::new(0.5, DateTime, false)),
            "12:00:00",
        );
        check(
            Data::DateTime(ExcelDateTime::new(
                1.5 + 1.0 / 86_400_000.0 * 250.0,
                TimeDelta,
                false,
            )),
            "PT36H0M0.250S",
        );
    }

    #[test]
    fn column_names_and_references_follow_the_spreadsheet_convention() {
        assert_eq!(column_name(0), "A");
        assert_eq!(column_name(25), "Z");
        assert_eq!(column_name(26), "AA");
        // The last column of an .xlsx sheet, 16,384 (ECMA-376 Part 1, 18.3.1.13: XFD).
        assert_eq!(column_name(16_383), "XFD");
        assert_eq!(parse_ref("XFD1048576"), Some((1_048_575, 16_383)));
        assert_eq!(parse_ref("B7"), Some((6, 1)));
        assert_eq!(parse_ref("7"), None);
        assert_eq!(cell_ref(6, 1), "B7");
        assert_eq!(
            resolve("xl", "worksheets/sheet1.xml"),
            "xl/worksheets/sheet1.xml"
        );
        assert_eq!(
            resolve("xl/worksheets", "../comments1.xml"),
            "xl/comments1.xml"
        );
        assert_eq!(
            resolve("xl", "/xl/worksheets/sheet2.xml"),
            "xl/worksheets/sheet2.xml"
        );
    }

    #[test]
    fn sniffing_tells_workbooks_from_text() {
        assert_eq!(sniff(b"site_id,ph\n"), None);
        assert_eq!(sniff(b"PK\x03\x04rest"), Some(Sniffed::Xlsx));
        let mut ods = b"PK\x03\x04".to_vec();
        ods.extend_from_slice(&[0; 26]);
        ods.extend_from_slice(b"mimetypeapplication/vnd.oasis.opendocument.spreadsheet");
        assert_eq!(sniff(&ods), Some(Sniffed::Ods));
        assert_eq!(
            sniff(&[0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1, 0]),
            Some(Sniffed::Compound)
        );
    }
}
