//! Fuzz the strict CSV reader that ingest uses: any bytes either parse or give a positioned
//! error, never a panic or a hang; and every parsed record, written back with emend's writer,
//! reads back to the same fields.
#![no_main]

use emend::table::csv::{CsvReader, RawRecord, ReadError, write_record};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&first, rest)) = data.split_first() else {
        return;
    };
    let delimiter = [b',', b'\t', b';', b'|'][usize::from(first) % 4];
    let mut reader = CsvReader::new(rest, delimiter);
    let mut rec = RawRecord::default();
    let mut records: Vec<Vec<Vec<u8>>> = Vec::new();
    loop {
        match reader.read_record(&mut rec) {
            Ok(true) => records.push(rec.iter().map(<[u8]>::to_vec).collect()),
            Ok(false) => break,
            Err(ReadError::Csv(e)) => {
                assert!(e.line >= 1, "errors name a line");
                assert!(
                    e.offset as usize <= rest.len(),
                    "errors point inside the input"
                );
                return;
            }
            Err(ReadError::Io(e)) => panic!("reading a slice cannot fail: {e}"),
        }
    }
    // Round trip: what the writer produces reads back the same (blank lines aside, which the
    // reader returns as one empty field and the writer writes as an empty line).
    let mut out = Vec::new();
    for r in &records {
        write_record(
            &mut out,
            r.iter().map(Vec::as_slice),
            delimiter,
            false,
            false,
        )
        .expect("write to a Vec");
    }
    let mut again = CsvReader::new(&out[..], delimiter);
    let mut back: Vec<Vec<Vec<u8>>> = Vec::new();
    while again.read_record(&mut rec).expect("our own output parses") {
        back.push(rec.iter().map(<[u8]>::to_vec).collect());
    }
    // A leading byte-order mark in the first field is consumed by the reader on the way back.
    if !out.starts_with(&[0xEF, 0xBB, 0xBF]) {
        assert_eq!(back, records);
    }
});
