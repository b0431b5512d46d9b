//! Raw extract bytes to an immutable stored snapshot. Never changes a value.
//!
//! The file is opened once as an [`Input`] and read through that one handle, never again by path
//! (issue 16): a pipe is first copied to a private file, a regular file is read up to its size at
//! open and refused at the end if its size or modification time moved meanwhile.
//!
//! One streaming pass reads the file once: every byte goes to the whole-file BLAKE3 hasher and
//! into 1 MiB pieces that a second thread hashes and compresses, while this thread parses the
//! records to validate them (header, field counts, encoding, key uniqueness) and computes the
//! canonical version hash. Memory stays at a few pieces plus 8 bytes per row for the key check.
//! Any problem aborts the surrounding transaction, so a bad file leaves the store unchanged.
//! Only the rows behind a repeated key hash are looked up in a second pass, through the same
//! handle after seeking back, and that pass must hash to the same bytes as the first.

mod input;
mod workbook;

pub use input::{DEFAULT_MAX_EVIDENCE, Input, InputOptions};
pub use workbook::{SheetOptions, SheetRows, sheet_names, sheet_rows};

use crate::error::{Error, Result};
use crate::hash::{BlobId, ChunkId, Digest, VersionHash};
use crate::model::{Dialect, IngestRecord, RowId, TextEncoding};
use crate::store::{ChunkCache, DeltaBase, EncodedPiece, PIECE_SIZE, PieceEncoder, Store, WriteTx};
use crate::table::csv::{CsvReader, RawRecord, ReadError};
use crate::table::{
    RowIdBuilder, RowMapBuilder, VersionHashBuilder, decode_into, guess_delimiter, key_hash,
};
use std::fs::File;
use std::io::Read;
use std::io::Take;
use std::path::{Path, PathBuf};
use std::sync::mpsc;

/// How many duplicate or offending keys an error lists.
const LIST_AT_MOST: usize = 5;

/// Knobs for an ingest.
#[derive(Debug, Clone, Default)]
pub struct IngestOptions {
    /// Table name.
    pub table: String,
    /// Key columns (empty: rows are named by position).
    pub key: Vec<String>,
    /// Field delimiter; guessed from the extension and first line when `None`.
    pub delimiter: Option<u8>,
    /// Text encoding; UTF-8 when `None`.
    pub encoding: Option<TextEncoding>,
    /// The largest field (and record) in bytes; [`crate::table::csv::DEFAULT_MAX_FIELD`] when
    /// `None`.
    pub max_field: Option<usize>,
    /// Which sheet of a workbook, and its header row (issue 18); only for workbooks.
    pub sheet: SheetOptions,
}

/// What an ingest stored.
#[derive(Debug, Clone)]
pub struct IngestOutcome {
    /// The record for the commit body.
    pub record: IngestRecord,
    /// The canonical hash of the raw version.
    pub version: VersionHash,
    /// Blank lines skipped.
    pub blank_lines: u64,
    /// Compressed bytes newly written (pieces already stored cost nothing).
    pub new_bytes: u64,
    /// The extract's row map ([`crate::table::row_map`]), for the store to keep with the
    /// ingest commit.
    pub row_map: Vec<u8>,
    /// What a workbook holds that its table cannot (empty for a CSV).
    pub notes: Vec<crate::table::workbook::WorkbookNote>,
}

/// Reads the file, feeding the whole-file hash and the piece pipeline.
struct Tee<'a> {
    file: Take<&'a File>,
    hasher: blake3::Hasher,
    piece: Vec<u8>,
    to_worker: Option<mpsc::SyncSender<Vec<u8>>>,
    n_bytes: u64,
}

impl Tee<'_> {
    fn flush_piece(&mut self) -> std::io::Result<()> {
        if self.piece.is_empty() {
            return Ok(());
        }
        let piece = std::mem::replace(&mut self.piece, Vec::with_capacity(PIECE_SIZE));
        if let Some(tx) = &self.to_worker {
            tx.send(piece)
                .map_err(|_| std::io::Error::other("compression thread stopped"))?;
        }
        Ok(())
    }
}

impl Read for Tee<'_> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.file.read(buf)?;
        let mut data = &buf[..n];
        self.hasher.update(data);
        self.n_bytes += n as u64;
        while !data.is_empty() {
            let room = PIECE_SIZE - self.piece.len();
            let take = room.min(data.len());
            self.piece.extend_from_slice(&data[..take]);
            data = &data[take..];
            if self.piece.len() == PIECE_SIZE {
                self.flush_piece()?;
            }
        }
        Ok(n)
    }
}

/// The table's previous extract, against which new pieces are stored as deltas.
#[derive(Clone)]
struct Previous {
    store: PathBuf,
    extract: BlobId,
    n_bytes: u64,
}

/// How far either side of a piece's own offset the reference range reaches into the previous
/// extract: rows withdrawn or inserted between extracts shift later bytes by this much at most
/// before a piece loses its match.
const DELTA_MARGIN: u64 = 256 * 1024;

fn compress_worker(
    rx: mpsc::Receiver<Vec<u8>>,
    tx: mpsc::Sender<Result<EncodedPiece>>,
    previous: Option<Previous>,
) {
    let fail = |tx: &mpsc::Sender<Result<EncodedPiece>>, e: Error| {
        let _ = tx.send(Err(e));
    };
    let mut encoder = match PieceEncoder::new() {
        Ok(c) => c,
        Err(e) => return fail(&tx, e),
    };
    // A second, read-only connection: the writer's transaction is open on the main thread, and
    // WAL lets this one read the committed previous extract meanwhile.
    let reference = match &previous {
        Some(p) => match Store::open_read_only(&p.store) {
            Ok(s) => Some((s, p.clone())),
            Err(e) => return fail(&tx, e),
        },
        None => None,
    };
    let mut cache = ChunkCache::default();
    let mut offset = 0u64;
    for piece in rx {
        let raw_len = piece.len() as u64;
        let start = offset;
        offset += raw_len;
        let result = (|| -> Result<EncodedPiece> {
            let Some((store, prev)) = &reference else {
                return encoder.plain(&piece);
            };
            let reader = store.read();
            let known = PieceEncoder::known(&piece);
            if reader.has_chunk(&known.id)? {
                return Ok(known);
            }
            let lo = start.saturating_sub(DELTA_MARGIN).min(prev.n_bytes);
            let hi = (start + raw_len + DELTA_MARGIN).min(prev.n_bytes);
            if hi <= lo {
                return encoder.plain(&piece);
            }
            let prefix = reader.blob_range(&prev.extract, lo, hi, &mut cache)?;
            let base = DeltaBase {
                blob: prev.extract,
                lo,
                hi,
            };
            encoder.delta(&piece, &prefix, base)
        })();
        if tx.send(result).is_err() {
            return;
        }
    }
}

/// Open `path` as an [`Input`] without limits, with an error that says which file and what to
/// do: devices, sockets and folders are refused, a FIFO is copied to a private file.
pub fn open_input(path: &Path) -> Result<Input> {
    Input::open(path, &InputOptions::default())
}

fn bad(path: &Path, line: u64, column: u64, problem: impl Into<String>) -> Error {
    Error::BadExtract {
        path: path.to_path_buf(),
        line,
        column,
        problem: problem.into(),
    }
}

fn csv_error(path: &Path, e: ReadError) -> Error {
    match e {
        ReadError::Csv(c) => bad(path, c.line, c.column, c.problem),
        ReadError::Io(io) => {
            // A corrupt stored piece surfaces as an io error carrying our own error.
            Error::io(path, io)
        }
    }
}

/// Stream an opened file into the store as a new extract of `opts.table`, inside `tx`.
///
/// Validates everything an extract must satisfy; on any error nothing written here survives,
/// because the caller drops the transaction. Everything is read through `input`'s one handle,
/// and a regular file that changed while it was read is refused ([`Error::Changed`]).
pub fn store_extract(
    tx: &WriteTx<'_>,
    input: &mut Input,
    opts: &IngestOptions,
) -> Result<IngestOutcome> {
    let path = &input.path().to_path_buf();
    let encoding = opts.encoding.unwrap_or(TextEncoding::Utf8);
    let max_field = opts
        .max_field
        .unwrap_or(crate::table::csv::DEFAULT_MAX_FIELD);
    // Peek at the start for the delimiter and the header's shape, then rewind.
    input.rewind()?;
    let mut head = vec![0u8; 64 * 1024];
    let n_head = read_full(&mut input.reader(), &mut head).map_err(|e| Error::io(path, e))?;
    head.truncate(n_head);
    if head.is_empty() {
        return Err(Error::BadFile {
            path: path.to_path_buf(),
            problem: "the file is empty".into(),
        });
    }
    // A workbook is read by its own path (issue 18); its first bytes say it is one.
    if crate::table::workbook::sniff(&head).is_some() {
        return workbook::store_workbook(tx, input, opts);
    }
    if opts.sheet != SheetOptions::default() {
        return Err(Error::Invalid(format!(
            "{} is not a workbook: --sheet and --header-row apply to .xlsx and .ods files only",
            path.display()
        )));
    }
    let delimiter = opts
        .delimiter
        .unwrap_or_else(|| guess_delimiter(path, strip_bom(&head)));
    input.rewind()?;

    let (piece_tx, piece_rx) = mpsc::sync_channel::<Vec<u8>>(2);
    let (done_tx, done_rx) = mpsc::channel();
    let previous = tx
        .read()
        .extract_at(&opts.table, u64::MAX)?
        .map(|(_, extract)| -> Result<Previous> {
            let n_bytes = tx
                .read()
                .blobs_sized(&extract)?
                .ok_or_else(|| Error::Corrupt(format!("stored file {extract} is missing")))?;
            Ok(Previous {
                store: tx.read().path().to_path_buf(),
                extract,
                n_bytes,
            })
        })
        .transpose()?;
    let worker = std::thread::spawn(move || compress_worker(piece_rx, done_tx, previous));
    let tee = Tee {
        file: input.reader(),
        hasher: blake3::Hasher::new(),
        piece: Vec::with_capacity(PIECE_SIZE),
        to_worker: Some(piece_tx),
        n_bytes: 0,
    };
    let mut reader = CsvReader::new(tee, delimiter).with_max_field(max_field);
    let mut chunks: Vec<ChunkId> = Vec::new();
    let mut new_bytes = 0u64;
    let drain = |block: bool, chunks: &mut Vec<ChunkId>, new_bytes: &mut u64| -> Result<()> {
        loop {
            let next = if block {
                match done_rx.recv() {
                    Ok(p) => p,
                    Err(_) => return Ok(()),
                }
            } else {
                match done_rx.try_recv() {
                    Ok(p) => p,
                    Err(_) => return Ok(()),
                }
            };
            let piece = next?;
            if let Some(data) = &piece.data
                && !tx.read().has_chunk(&piece.id)?
            {
                *new_bytes += data.len() as u64;
                tx.put_piece(&piece)?;
            }
            chunks.push(piece.id);
        }
    };

    let result = (|| -> Result<(IngestRecord, VersionHash, u64, Vec<u8>)> {
        let mut rec = RawRecord::default();
        if !reader
            .read_record(&mut rec)
            .map_err(|e| csv_error(path, e))?
        {
            return Err(Error::BadFile {
                path: path.to_path_buf(),
                problem: "the file is empty".into(),
            });
        }
        let mut text = String::new();
        let mut header: Vec<String> = Vec::with_capacity(rec.len());
        // Each name's first column: one lookup per column, so a header of a million columns
        // is checked in linear time.
        let mut first_col: std::collections::HashMap<String, usize> =
            std::collections::HashMap::with_capacity(rec.len());
        for (i, field) in rec.iter().enumerate() {
            decode_into(field, encoding, &mut text).map_err(|at| utf8_error(path, &rec, i, at))?;
            let name = text.trim().to_string();
            if name.is_empty() {
                return Err(bad(
                    path,
                    rec.line,
                    i as u64 + 1,
                    "empty column name in the header",
                ));
            }
            if let Some(j) = first_col.get(&name) {
                return Err(bad(
                    path,
                    rec.line,
                    i as u64 + 1,
                    format!("duplicate column name '{name}' (also column {})", j + 1),
                ));
            }
            first_col.insert(name.clone(), i);
            header.push(name);
        }
        let header_line = rec.line;
        let crlf = line_ends_crlf(&head);
        let quote_all = header_quoted(strip_bom(&head), delimiter, header.len());
        let mut key_idx = Vec::new();
        for k in &opts.key {
            let idx = *first_col.get(k).ok_or_else(|| Error::BadFile {
                path: path.to_path_buf(),
                problem: format!(
                    "key column '{k}' is not in the header (columns: {})",
                    some_names(&header)
                ),
            })?;
            if key_idx.contains(&idx) {
                return Err(Error::Invalid(format!("key column '{k}' is named twice")));
            }
            key_idx.push(idx);
        }

        let mut hasher = VersionHashBuilder::new(&header);
        let mut row_map = RowMapBuilder::new(!key_idx.is_empty());
        let mut n_rows = 0u64;
        let mut blank_lines = 0u64;
        let mut cells: Vec<String> = vec![String::new(); header.len()];
        let mut row_id = String::new();
        let row_ids = RowIdBuilder::new(key_idx.clone());
        loop {
            if !reader
                .read_record(&mut rec)
                .map_err(|e| csv_error(path, e))?
            {
                break;
            }
            drain(false, &mut chunks, &mut new_bytes)?;
            if rec.is_blank_line() && header.len() > 1 {
                blank_lines += 1;
                continue;
            }
            if rec.len() != header.len() {
                return Err(bad(
                    path,
                    rec.line,
                    0,
                    format!(
                        "row has {} fields but the header (line {header_line}) has {}",
                        rec.len(),
                        header.len()
                    ),
                ));
            }
            n_rows += 1;
            for (i, field) in rec.iter().enumerate() {
                decode_into(field, encoding, &mut cells[i])
                    .map_err(|at| utf8_error(path, &rec, i, at))?;
            }
            if let Some(&k) = key_idx.iter().find(|&&k| cells[k].trim().is_empty()) {
                return Err(bad(
                    path,
                    rec.line,
                    k as u64 + 1,
                    format!("key column '{}' is blank", header[k]),
                ));
            }
            row_ids.build_into(n_rows, &cells, &mut row_id);
            let h = if row_ids.is_keyed() {
                key_hash(row_id.as_bytes())
            } else {
                0
            };
            row_map.row(n_rows, rec.offset, rec.line, h);
            hasher.raw_row(&row_id, &cells);
        }
        if n_rows == 0 {
            return Err(Error::BadFile {
                path: path.to_path_buf(),
                problem: "the file has a header but no data rows".into(),
            });
        }
        if !key_idx.is_empty() {
            let dup = row_map.repeated_hashes();
            if !dup.is_empty() {
                let first_pass = reader.get_ref().hasher.clone().finalize();
                let listed = list_duplicates(
                    input,
                    first_pass,
                    ListFormat {
                        delimiter,
                        encoding,
                        max_field,
                    },
                    &key_idx,
                    &header,
                    &dup,
                )?;
                if let Some(msg) = listed {
                    return Err(Error::DuplicateKey {
                        path: path.to_path_buf(),
                        problem: msg,
                    });
                }
            }
        }
        let dialect = Dialect {
            delimiter,
            crlf,
            bom: reader.saw_bom(),
            quote_all,
            encoding,
        };
        let record = IngestRecord {
            table: opts.table.clone(),
            extract: BlobId(Digest([0; 32])),
            file_name: input.file_name(),
            n_bytes: 0,
            header,
            key: opts.key.clone(),
            dialect,
            n_rows,
        };
        let distrusted = vec![false; record.header.len()];
        let version = hasher.finish(&record.header, &distrusted);
        let map = row_map.finish(reader.offset());
        Ok((record, version, blank_lines, map))
    })();

    // Whatever happened, stop the worker cleanly before returning.
    let mut tee = reader_into_tee(reader);
    let flushed = if result.is_ok() {
        tee.flush_piece()
    } else {
        Ok(())
    };
    tee.to_worker = None;
    let drained = if result.is_ok() {
        drain(true, &mut chunks, &mut new_bytes)
    } else {
        Ok(())
    };
    let _ = worker.join();
    let (mut record, version, blank_lines, row_map) = result?;
    flushed.map_err(|e| Error::io(path, e))?;
    drained?;
    // The end check: every byte present at open was read, and the file has not moved since.
    input.finish(tee.n_bytes)?;
    let extract = BlobId(Digest(*tee.hasher.finalize().as_bytes()));
    record.extract = extract;
    record.n_bytes = tee.n_bytes;
    tx.put_blob(&extract, tee.n_bytes, &chunks)?;
    Ok(IngestOutcome {
        record,
        version,
        blank_lines,
        new_bytes,
        row_map,
        notes: Vec::new(),
    })
}

fn reader_into_tee(reader: CsvReader<Tee<'_>>) -> Tee<'_> {
    reader.into_inner()
}

/// The first names of a header, for messages (a header may have a million).
fn some_names(header: &[String]) -> String {
    const SHOWN: usize = 20;
    let mut text = header
        .iter()
        .take(SHOWN)
        .map(String::as_str)
        .collect::<Vec<_>>()
        .join(", ");
    if header.len() > SHOWN {
        text.push_str(&format!(" and {} more", header.len() - SHOWN));
    }
    text
}

fn read_full(file: &mut impl Read, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut n = 0;
    while n < buf.len() {
        match file.read(&mut buf[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(n)
}

fn strip_bom(b: &[u8]) -> &[u8] {
    b.strip_prefix(&[0xEF, 0xBB, 0xBF]).unwrap_or(b)
}

fn line_ends_crlf(head: &[u8]) -> bool {
    match memchr::memchr(b'\n', head) {
        Some(i) => i > 0 && head[i - 1] == b'\r',
        None => false,
    }
}

/// Whether every header field is written in quotes (then export quotes every field too).
fn header_quoted(head: &[u8], delimiter: u8, n_fields: usize) -> bool {
    let end = memchr::memchr2(b'\n', b'\r', head).unwrap_or(head.len());
    let line = &head[..end];
    if line.first() != Some(&b'"') || line.last() != Some(&b'"') {
        return false;
    }
    let sep = [b'"', delimiter, b'"'];
    line.windows(3).filter(|w| *w == sep).count() + 1 == n_fields
}

fn utf8_error(path: &Path, rec: &RawRecord, field: usize, at: usize) -> Error {
    bad(
        path,
        rec.line,
        field as u64 + 1,
        format!(
            "invalid UTF-8 at byte {at} of the field (the record starts at byte offset {}); \
             if the file is not UTF-8, give --encoding windows-1252 or --encoding latin-1",
            rec.offset
        ),
    )
}

/// How the extract is read, for the second pass.
struct ListFormat {
    delimiter: u8,
    encoding: TextEncoding,
    max_field: usize,
}

/// Hashes what a second pass reads, to prove it read the bytes the first pass stored.
struct Rehash<R> {
    inner: R,
    hasher: blake3::Hasher,
}

impl<R: Read> Read for Rehash<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        self.hasher.update(&buf[..n]);
        Ok(n)
    }
}

/// Second pass, through the same handle from its first byte, to name the rows behind duplicate
/// key hashes. The bytes read must hash to `first_pass` (the whole-file hash of the first
/// pass): otherwise the file was rewritten in place in between, and it is refused rather than
/// trusted to have no duplicates after all.
fn list_duplicates(
    input: &Input,
    first_pass: blake3::Hash,
    format: ListFormat,
    key_idx: &[usize],
    header: &[String],
    dup_hashes: &[u64],
) -> Result<Option<String>> {
    let ListFormat {
        delimiter,
        encoding,
        max_field,
    } = format;
    let path = &input.path().to_path_buf();
    input.rewind()?;
    let wanted: std::collections::HashSet<u64> = dup_hashes.iter().copied().collect();
    let mut seen: std::collections::HashMap<String, Vec<u64>> = Default::default();
    let rehash = Rehash {
        inner: input.reader(),
        hasher: blake3::Hasher::new(),
    };
    let mut reader = CsvReader::new(rehash, delimiter).with_max_field(max_field);
    let mut rec = RawRecord::default();
    let mut first = true;
    let mut cells = vec![String::new(); header.len()];
    let row_ids = RowIdBuilder::new(key_idx.to_vec());
    // The first pass parsed and decoded these very bytes, so a failure now means they changed.
    while reader.read_record(&mut rec).map_err(|e| match e {
        ReadError::Csv(_) => Error::Changed(path.clone()),
        io => csv_error(path, io),
    })? {
        if first || rec.is_blank_line() {
            first = false;
            continue;
        }
        for &k in key_idx {
            decode_into(rec.get(k).unwrap_or_default(), encoding, &mut cells[k])
                .map_err(|_| Error::Changed(path.clone()))?;
        }
        let mut key = String::new();
        row_ids.build_into(0, &cells, &mut key);
        if wanted.contains(&key_hash(key.as_bytes())) {
            seen.entry(key).or_default().push(rec.line);
        }
    }
    let mut rest = reader.into_inner();
    std::io::copy(&mut rest, &mut std::io::sink()).map_err(|e| Error::io(path, e))?;
    if rest.hasher.finalize() != first_pass {
        return Err(Error::Changed(path.clone()));
    }
    let mut dups: Vec<(String, Vec<u64>)> = seen.into_iter().filter(|(_, l)| l.len() > 1).collect();
    if dups.is_empty() {
        return Ok(None);
    }
    dups.sort_by_key(|(_, lines)| lines[1]);
    let names: Vec<&str> = key_idx.iter().map(|&k| header[k].as_str()).collect();
    let shown: Vec<String> = dups
        .iter()
        .take(LIST_AT_MOST)
        .map(|(k, lines)| {
            let lines: Vec<String> = lines.iter().map(u64::to_string).collect();
            format!("'{}' on lines {}", RowId(k.clone()), lines.join(", "))
        })
        .collect();
    let more = if dups.len() > LIST_AT_MOST {
        format!(" and {} more", dups.len() - LIST_AT_MOST)
    } else {
        String::new()
    };
    Ok(Some(format!(
        "key ({}) is not unique: {}{more}; choose a key that identifies each row, or ingest without --key to name rows by position",
        names.join(", "),
        shown.join("; ")
    )))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn try_ingest(csv: &str, key: &[&str]) -> (tempfile::TempDir, Result<IngestOutcome>) {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("x.csv");
        std::fs::write(&path, csv).unwrap();
        let mut store = Store::init(dir.path(), "2026-10-01T09:00:00Z").unwrap();
        let tx = store.transaction().unwrap();
        let opts = IngestOptions {
            table: "x".into(),
            key: key.iter().map(|k| k.to_string()).collect(),
            ..IngestOptions::default()
        };
        let mut input = open_input(&path).unwrap();
        let out = store_extract(&tx, &mut input, &opts);
        (dir, out)
    }

    #[test]
    fn a_clean_extract_is_counted_and_named_by_its_key() {
        let (_dir, out) = try_ingest("id,v\r\nA,1\r\nB,2\r\n\r\n", &["id"]);
        let out = out.unwrap();
        assert_eq!(out.record.n_rows, 2);
        assert_eq!(out.record.header, ["id", "v"]);
        assert!(out.record.dialect.crlf);
        assert_eq!(out.record.dialect.delimiter, b',');
    }

    #[test]
    fn problems_name_the_file_line_and_field_and_each_kind_is_its_own_error() {
        let (_dir, dup) = try_ingest("id,v\nA,1\nB,2\nA,3\n", &["id"]);
        match dup {
            Err(Error::DuplicateKey { problem, .. }) => {
                assert!(problem.contains("'A' on lines 2, 4"), "{problem}")
            }
            other => panic!("{other:?}"),
        }
        let (_dir, ragged) = try_ingest("id,v\nA,1\nB\n", &["id"]);
        assert!(
            matches!(ragged, Err(Error::BadExtract { line: 3, .. })),
            "{ragged:?}"
        );
        let (_dir, blank) = try_ingest("id,v\nA,1\n ,2\n", &["id"]);
        assert!(
            matches!(
                blank,
                Err(Error::BadExtract {
                    line: 3,
                    column: 1,
                    ..
                })
            ),
            "{blank:?}"
        );
        let dir = tempfile::tempdir().unwrap();
        assert!(matches!(open_input(dir.path()), Err(Error::NotAFile(_))));
    }
}
