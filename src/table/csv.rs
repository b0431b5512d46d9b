//! A streaming, strict RFC 4180 record reader over any `Read`.
//!
//! Written for emend rather than taken from a general CSV crate because ingest must say exactly
//! where a file is broken (an unterminated quote names the line where the quoted field began, a
//! stray quote names its line and field) and must never silently repair a file. It accepts any
//! single-byte delimiter, CR LF, LF or lone CR line ends, and a UTF-8 byte-order mark at the very
//! start. Fields are returned as raw bytes; decoding is the caller's job.
//!
//! A record holds at most [`DEFAULT_MAX_FIELD`] bytes (64 MiB, raised with
//! [`CsvReader::with_max_field`]) and [`DEFAULT_MAX_COLUMNS`] fields, so the memory a reader
//! needs is its buffer plus one such record, whatever the input.

use std::io::Read;

const BUF_SIZE: usize = 256 * 1024;

/// The default largest field, and largest record, in bytes: 64 MiB.
pub const DEFAULT_MAX_FIELD: usize = 64 * 1024 * 1024;

/// The default largest number of fields in one record: 2^20 (1,048,576).
pub const DEFAULT_MAX_COLUMNS: usize = 1 << 20;

/// Where and why a file does not parse.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CsvError {
    /// 1-based line.
    pub line: u64,
    /// 1-based field number within the record (0 when not tied to a field).
    pub column: u64,
    /// Byte offset from the start of the file.
    pub offset: u64,
    /// What is wrong.
    pub problem: String,
}

/// One record: the bytes of its fields back to back, and where each field ends.
#[derive(Debug, Default, Clone)]
pub struct RawRecord {
    data: Vec<u8>,
    ends: Vec<usize>,
    /// 1-based line on which the record starts.
    pub line: u64,
    /// Byte offset of the record's first byte.
    pub offset: u64,
}

impl RawRecord {
    /// Number of fields.
    pub fn len(&self) -> usize {
        self.ends.len()
    }

    /// Whether the record has no fields.
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }

    /// Field `i`'s bytes.
    pub fn get(&self, i: usize) -> Option<&[u8]> {
        let end = *self.ends.get(i)?;
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        Some(&self.data[start..end])
    }

    /// Iterate over the fields.
    pub fn iter(&self) -> impl Iterator<Item = &[u8]> {
        (0..self.len()).map(move |i| self.get(i).expect("index below len"))
    }

    /// True for a record made of one empty field (a blank line).
    pub fn is_blank_line(&self) -> bool {
        self.ends.len() == 1 && self.ends[0] == 0
    }

    /// Build a record from fields (for tests and writers).
    pub fn from_fields<'a>(fields: impl IntoIterator<Item = &'a [u8]>) -> Self {
        let mut r = RawRecord::default();
        for f in fields {
            r.data.extend_from_slice(f);
            r.ends.push(r.data.len());
        }
        r
    }

    fn clear(&mut self) {
        self.data.clear();
        self.ends.clear();
    }
}

#[derive(Clone, Copy, PartialEq, Eq)]
enum State {
    StartField,
    Unquoted,
    Quoted,
    QuoteInQuoted,
}

/// Streaming record reader.
pub struct CsvReader<R> {
    inner: R,
    buf: Vec<u8>,
    pos: usize,
    len: usize,
    eof: bool,
    delimiter: u8,
    line: u64,
    offset: u64,
    started: bool,
    bom: bool,
    pending_cr: bool,
    max_field: usize,
    max_columns: usize,
}

impl<R: Read> CsvReader<R> {
    /// A reader splitting fields at `delimiter`.
    pub fn new(inner: R, delimiter: u8) -> Self {
        CsvReader {
            inner,
            buf: vec![0; BUF_SIZE],
            pos: 0,
            len: 0,
            eof: false,
            delimiter,
            line: 1,
            offset: 0,
            started: false,
            bom: false,
            pending_cr: false,
            max_field: DEFAULT_MAX_FIELD,
            max_columns: DEFAULT_MAX_COLUMNS,
        }
    }

    /// Refuse a record (and so any field) of more than `max` bytes instead of the default.
    pub fn with_max_field(mut self, max: usize) -> Self {
        self.max_field = max;
        self
    }

    /// Refuse a record of more than `max` fields instead of the default.
    pub fn with_max_columns(mut self, max: usize) -> Self {
        self.max_columns = max;
        self
    }

    /// No limits: for stored extracts, which were held to the limits when they were ingested.
    pub fn unlimited(self) -> Self {
        self.with_max_field(usize::MAX).with_max_columns(usize::MAX)
    }

    /// Read from the middle of a file: the input begins at a record's first byte, which is
    /// byte `offset` and line `line` of the file (no byte-order mark is looked for).
    pub fn resume_at(mut self, offset: u64, line: u64) -> Self {
        self.started = true;
        self.offset = offset;
        self.line = line;
        self
    }

    /// Whether the input began with a UTF-8 byte-order mark (known after the first record).
    pub fn saw_bom(&self) -> bool {
        self.bom
    }

    /// Bytes consumed so far.
    pub fn offset(&self) -> u64 {
        self.offset
    }

    /// The underlying reader.
    pub fn get_ref(&self) -> &R {
        &self.inner
    }

    /// Give back the underlying reader.
    pub fn into_inner(self) -> R {
        self.inner
    }

    fn fill(&mut self) -> std::io::Result<bool> {
        if self.pos < self.len {
            return Ok(true);
        }
        if self.eof {
            return Ok(false);
        }
        loop {
            match self.inner.read(&mut self.buf) {
                Ok(0) => {
                    self.eof = true;
                    self.pos = 0;
                    self.len = 0;
                    return Ok(false);
                }
                Ok(n) => {
                    self.pos = 0;
                    self.len = n;
                    return Ok(true);
                }
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(e),
            }
        }
    }

    fn skip_bom(&mut self) -> std::io::Result<()> {
        self.started = true;
        // The BOM may straddle reads only for absurdly small buffers; read up to 3 bytes.
        let mut head = Vec::with_capacity(3);
        while head.len() < 3 && self.fill()? {
            head.push(self.buf[self.pos]);
            self.pos += 1;
        }
        if head == [0xEF, 0xBB, 0xBF] {
            self.bom = true;
            self.offset = 3;
        } else {
            // Put the bytes back in front of the buffer.
            let rest = self.buf[self.pos..self.len].to_vec();
            let mut merged = head;
            merged.extend_from_slice(&rest);
            if merged.len() > self.buf.len() {
                self.buf.resize(merged.len(), 0);
            }
            self.buf[..merged.len()].copy_from_slice(&merged);
            self.pos = 0;
            self.len = merged.len();
        }
        Ok(())
    }

    /// Read the next record into `rec`; `Ok(false)` at the end of input.
    pub fn read_record(&mut self, rec: &mut RawRecord) -> Result<bool, ReadError> {
        if !self.started {
            self.skip_bom()?;
        }
        rec.clear();
        let mut state = State::StartField;
        let mut quote_line = 0;
        let mut any = false;
        rec.line = self.line;
        rec.offset = self.offset;
        loop {
            if !self.fill()? {
                // End of input.
                return match state {
                    State::Quoted => Err(ReadError::Csv(CsvError {
                        line: quote_line,
                        column: rec.ends.len() as u64 + 1,
                        offset: self.offset,
                        problem: format!(
                            "quoted field opened on line {quote_line} is never closed (unterminated quote)"
                        ),
                    })),
                    _ if !any => Ok(false),
                    _ => {
                        rec.ends.push(rec.data.len());
                        Ok(true)
                    }
                };
            }
            if self.pending_cr {
                self.pending_cr = false;
                if self.buf[self.pos] == b'\n' {
                    self.pos += 1;
                    self.offset += 1;
                    continue;
                }
            }
            let delim = self.delimiter;
            while self.pos < self.len {
                let b = self.buf[self.pos];
                if !any {
                    any = true;
                    rec.line = self.line;
                    rec.offset = self.offset;
                }
                if b == 0 {
                    return Err(ReadError::Csv(CsvError {
                        line: self.line,
                        column: rec.ends.len() as u64 + 1,
                        offset: self.offset,
                        problem: "NUL byte in the file (is this a binary or UTF-16 file?)".into(),
                    }));
                }
                self.pos += 1;
                self.offset += 1;
                match state {
                    State::StartField | State::Unquoted => {
                        if b == delim {
                            rec.ends.push(rec.data.len());
                            if rec.ends.len() >= self.max_columns {
                                return Err(self.too_many_columns(rec));
                            }
                            state = State::StartField;
                        } else if b == b'\n' || b == b'\r' {
                            rec.ends.push(rec.data.len());
                            self.line += 1;
                            if b == b'\r' {
                                self.after_cr();
                            }
                            return Ok(true);
                        } else if b == b'"' {
                            if state == State::StartField {
                                state = State::Quoted;
                                quote_line = self.line;
                            } else {
                                return Err(self.stray_quote(rec));
                            }
                        } else {
                            // Fast path: copy the run of plain bytes in one go.
                            let start = self.pos - 1;
                            let mut end = self.pos;
                            while end < self.len {
                                let c = self.buf[end];
                                if c == delim || c == b'\n' || c == b'\r' || c == b'"' || c == 0 {
                                    break;
                                }
                                end += 1;
                            }
                            rec.data.extend_from_slice(&self.buf[start..end]);
                            self.offset += (end - self.pos) as u64;
                            self.pos = end;
                            state = State::Unquoted;
                            if rec.data.len() > self.max_field {
                                return Err(self.too_long(rec));
                            }
                        }
                    }
                    State::Quoted => {
                        if b == b'"' {
                            state = State::QuoteInQuoted;
                        } else {
                            // A line ends at LF, or at a CR not followed by LF.
                            let cr_alone =
                                b == b'\r' && !(self.pos < self.len && self.buf[self.pos] == b'\n');
                            if b == b'\n' || cr_alone {
                                self.line += 1;
                            }
                            rec.data.push(b);
                            if rec.data.len() > self.max_field {
                                return Err(self.too_long(rec));
                            }
                        }
                    }
                    State::QuoteInQuoted => {
                        if b == b'"' {
                            rec.data.push(b'"');
                            state = State::Quoted;
                        } else if b == delim {
                            rec.ends.push(rec.data.len());
                            if rec.ends.len() >= self.max_columns {
                                return Err(self.too_many_columns(rec));
                            }
                            state = State::StartField;
                        } else if b == b'\n' || b == b'\r' {
                            rec.ends.push(rec.data.len());
                            self.line += 1;
                            if b == b'\r' {
                                self.after_cr();
                            }
                            return Ok(true);
                        } else {
                            return Err(ReadError::Csv(CsvError {
                                line: self.line,
                                column: rec.ends.len() as u64 + 1,
                                offset: self.offset - 1,
                                problem: format!(
                                    "unexpected '{}' after the closing quote of a quoted field",
                                    char::from(b).escape_default()
                                ),
                            }));
                        }
                    }
                }
            }
        }
    }

    fn after_cr(&mut self) {
        if self.pos < self.len {
            if self.buf[self.pos] == b'\n' {
                self.pos += 1;
                self.offset += 1;
            }
        } else {
            self.pending_cr = true;
        }
    }

    /// The record passed `max_field` bytes in its current field; the error names the line the
    /// record starts on (a quoted field may span lines) and that field.
    fn too_long(&self, rec: &RawRecord) -> ReadError {
        let field_start = rec.ends.last().copied().unwrap_or(0);
        let what = if rec.data.len() - field_start > self.max_field {
            "field"
        } else {
            "record"
        };
        ReadError::Csv(CsvError {
            line: rec.line,
            column: rec.ends.len() as u64 + 1,
            offset: self.offset,
            problem: format!(
                "the {what} is longer than the limit of {}; if it is meant to be this long, \
                 set EMEND_MAX_FIELD_MIB to a larger number of MiB",
                crate::error::mib(self.max_field as u64)
            ),
        })
    }

    fn too_many_columns(&self, rec: &RawRecord) -> ReadError {
        ReadError::Csv(CsvError {
            line: rec.line,
            column: rec.ends.len() as u64 + 1,
            offset: self.offset,
            problem: format!(
                "the record has more than {} fields, the most a table may have",
                self.max_columns
            ),
        })
    }

    fn stray_quote(&self, rec: &RawRecord) -> ReadError {
        ReadError::Csv(CsvError {
            line: self.line,
            column: rec.ends.len() as u64 + 1,
            offset: self.offset - 1,
            problem: "a double quote inside an unquoted field (RFC 4180 allows quotes only in quoted fields, doubled)".into(),
        })
    }
}

/// Failure to read a record.
#[derive(Debug)]
pub enum ReadError {
    /// The bytes are not valid CSV.
    Csv(CsvError),
    /// The reader failed.
    Io(std::io::Error),
}

impl From<std::io::Error> for ReadError {
    fn from(e: std::io::Error) -> Self {
        ReadError::Io(e)
    }
}

/// Write one record with `delimiter`, quoting a field when it needs it (or always).
pub fn write_record<'a, W: std::io::Write + ?Sized>(
    out: &mut W,
    fields: impl IntoIterator<Item = &'a [u8]>,
    delimiter: u8,
    quote_all: bool,
    crlf: bool,
) -> std::io::Result<()> {
    for (i, f) in fields.into_iter().enumerate() {
        if i > 0 {
            out.write_all(&[delimiter])?;
        }
        let needs = quote_all
            || f.iter()
                .any(|&c| c == delimiter || c == b'"' || c == b'\n' || c == b'\r');
        if needs {
            out.write_all(b"\"")?;
            let mut start = 0;
            for (j, &c) in f.iter().enumerate() {
                if c == b'"' {
                    out.write_all(&f[start..=j])?;
                    out.write_all(b"\"")?;
                    start = j + 1;
                }
            }
            out.write_all(&f[start..])?;
            out.write_all(b"\"")?;
        } else {
            out.write_all(f)?;
        }
    }
    out.write_all(if crlf { b"\r\n" } else { b"\n" })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(input: &[u8], delimiter: u8) -> Result<Vec<Vec<String>>, CsvError> {
        // A tiny inner reader that returns a few bytes at a time, to exercise buffer edges.
        struct Dribble<'a>(&'a [u8]);
        impl Read for Dribble<'_> {
            fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
                let n = self.0.len().min(buf.len()).min(3);
                buf[..n].copy_from_slice(&self.0[..n]);
                self.0 = &self.0[n..];
                Ok(n)
            }
        }
        let mut out = Vec::new();
        for dribble in [false, true] {
            let mut rows = Vec::new();
            let mut rec = RawRecord::default();
            let result = if dribble {
                let mut r = CsvReader::new(Dribble(input), delimiter);
                loop {
                    match r.read_record(&mut rec) {
                        Ok(true) => rows.push(
                            rec.iter()
                                .map(|f| String::from_utf8_lossy(f).into_owned())
                                .collect(),
                        ),
                        Ok(false) => break Ok(()),
                        Err(ReadError::Csv(e)) => break Err(e),
                        Err(ReadError::Io(e)) => panic!("io: {e}"),
                    }
                }
            } else {
                let mut r = CsvReader::new(input, delimiter);
                loop {
                    match r.read_record(&mut rec) {
                        Ok(true) => rows.push(
                            rec.iter()
                                .map(|f| String::from_utf8_lossy(f).into_owned())
                                .collect(),
                        ),
                        Ok(false) => break Ok(()),
                        Err(ReadError::Csv(e)) => break Err(e),
                        Err(ReadError::Io(e)) => panic!("io: {e}"),
                    }
                }
            };
            result?;
            out.push(rows);
        }
        assert_eq!(out[0], out[1], "same parse whatever the read sizes");
        Ok(out.swap_remove(0))
    }

    #[test]
    fn rfc4180_reference_cases() {
        // Source: RFC 4180 section 2 rules 1-7 and ABNF, cases and expected parses in
        // tests/reference/csv_rfc4180_cases.json.
        let doc = crate::testdata::reference("csv_rfc4180_cases.json");
        let cases = doc["cases"].as_array().expect("cases");
        assert!(cases.len() >= 13);
        for case in cases {
            let id = case["id"].as_str().unwrap();
            let input = case["input"].as_str().unwrap();
            let got = parse(input.as_bytes(), b',');
            if case["valid"].as_bool().unwrap() {
                let mut expected: Vec<Vec<String>> = Vec::new();
                if let Some(h) = case.get("expected_header") {
                    expected.push(serde_json::from_value(h.clone()).unwrap());
                }
                let recs: Vec<Vec<String>> =
                    serde_json::from_value(case["expected_records"].clone()).unwrap();
                expected.extend(recs);
                assert_eq!(got.expect(id), expected, "{id}");
            } else {
                assert!(got.is_err(), "{id} must be rejected");
            }
        }
    }

    fn check_err(input: &str, line: u64, column: u64, needle: &str) {
        let err = parse(input.as_bytes(), b',').expect_err(input);
        assert_eq!((err.line, err.column), (line, column), "{input:?}: {err:?}");
        assert!(err.problem.contains(needle), "{}", err.problem);
    }

    #[test]
    fn errors_name_the_place() {
        check_err("a,b\n1,\"open\n2,3\n", 2, 2, "never closed");
        check_err("a,b\n1,x\"y\n", 2, 2, "unquoted field");
        check_err("a,b\n1,\"x\"y\n", 2, 2, "after the closing quote");
        check_err("a,b\n1,\0\n", 2, 2, "NUL");
    }

    #[test]
    fn line_ends_bom_and_lines() {
        let rows = parse(b"\xEF\xBB\xBFa;b\r1;2\r\n3;4\n", b';').unwrap();
        assert_eq!(rows, vec![vec!["a", "b"], vec!["1", "2"], vec!["3", "4"]]);
        let mut r = CsvReader::new(&b"h\n\"x\ny\"\nz\n"[..], b',');
        let mut rec = RawRecord::default();
        let mut lines = Vec::new();
        while r.read_record(&mut rec).unwrap() {
            lines.push(rec.line);
        }
        assert_eq!(lines, vec![1, 2, 4]);
    }

    #[test]
    fn a_field_or_record_over_the_limit_is_refused_naming_line_and_field() {
        let read_all = |input: &[u8], max: usize, cols: usize| -> Result<usize, CsvError> {
            let mut r = CsvReader::new(input, b',')
                .with_max_field(max)
                .with_max_columns(cols);
            let mut rec = RawRecord::default();
            let mut n = 0;
            loop {
                match r.read_record(&mut rec) {
                    Ok(true) => n += 1,
                    Ok(false) => return Ok(n),
                    Err(ReadError::Csv(e)) => return Err(e),
                    Err(ReadError::Io(e)) => panic!("io: {e}"),
                }
            }
        };
        // At the limit is fine, one byte over is not, quoted or not.
        assert_eq!(read_all(b"a,b\n12345,1234\n", 9, 8), Ok(2));
        let e = read_all(b"a,b\n12345,12345\n", 9, 8).unwrap_err();
        assert_eq!((e.line, e.column), (2, 2), "{e:?}");
        assert!(e.problem.contains("the record is longer"), "{}", e.problem);
        let e = read_all(b"a,b\n,\"x\n\n\"\"1234567890\"\n", 9, 8).unwrap_err();
        assert_eq!(
            (e.line, e.column),
            (2, 2),
            "the line the record starts on: {e:?}"
        );
        assert!(e.problem.contains("the field is longer"), "{}", e.problem);
        assert!(e.problem.contains("EMEND_MAX_FIELD_MIB"), "{}", e.problem);
        // Columns: three fields pass a limit of three, four do not.
        assert_eq!(read_all(b"a,b,c\n", 99, 3), Ok(1));
        let e = read_all(b"a,b,c,d\n", 99, 3).unwrap_err();
        assert_eq!((e.line, e.column), (1, 4), "{e:?}");
        assert!(e.problem.contains("more than 3 fields"), "{}", e.problem);
    }

    #[test]
    fn writer_quotes_only_when_needed() {
        let mut out = Vec::new();
        write_record(
            &mut out,
            [&b"plain"[..], b"a,b", b"say \"hi\"", b"two\nlines"],
            b',',
            false,
            true,
        )
        .unwrap();
        assert_eq!(out, b"plain,\"a,b\",\"say \"\"hi\"\"\",\"two\nlines\"\r\n");
        let back = parse(&out, b',').unwrap();
        assert_eq!(back[0], vec!["plain", "a,b", "say \"hi\"", "two\nlines"]);
    }
}
