//! How an extract's bytes become text: decoding a field in the extract's encoding, and guessing
//! the delimiter from the file name and first line. Both ingest and the rebuild of a version
//! decode through here, so they read the same bytes as the same text.

use crate::model::TextEncoding;
use std::path::Path;

/// Decode one field in `encoding` into `out` (cleared first).
///
/// On invalid UTF-8 returns the index of the first bad byte within the field.
pub fn decode_into(bytes: &[u8], encoding: TextEncoding, out: &mut String) -> Result<(), usize> {
    out.clear();
    match encoding {
        // A workbook's cells are text already (`table::workbook`); nothing decodes its bytes.
        TextEncoding::Utf8 | TextEncoding::Workbook(_) => match std::str::from_utf8(bytes) {
            Ok(s) => {
                out.push_str(s);
                Ok(())
            }
            Err(e) => Err(e.valid_up_to()),
        },
        TextEncoding::Latin1 => {
            out.extend(bytes.iter().map(|&b| char::from(b)));
            Ok(())
        }
        TextEncoding::Windows1252 => {
            let (text, _) = encoding_rs::WINDOWS_1252.decode_without_bom_handling(bytes);
            out.push_str(&text);
            Ok(())
        }
    }
}

/// Guess the delimiter from the file name and the first line.
pub fn guess_delimiter(path: &Path, first_bytes: &[u8]) -> u8 {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if matches!(ext.as_deref(), Some("tsv" | "tab")) {
        return b'\t';
    }
    let line_end = memchr::memchr(b'\n', first_bytes).unwrap_or(first_bytes.len());
    let line = &first_bytes[..line_end];
    let mut best = (b',', 0usize);
    for cand in [b',', b'\t', b';', b'|'] {
        let n = line.iter().filter(|&&b| b == cand).count();
        if n > best.1 {
            best = (cand, n);
        }
    }
    best.0
}
