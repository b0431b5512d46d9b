//! The physical floor for `export`: parse a CSV file and write every record back out, with the
//! general-purpose `csv` crate (an independent reader and writer from crates.io), nothing else.
//! `bench/run.py` times it beside `emend export` of the same extract.
//!
//! ```sh
//! cargo run --release --example csv_floor -- IN.csv OUT.csv
//! ```

use std::error::Error;

fn main() -> Result<(), Box<dyn Error>> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [input, output] = args.as_slice() else {
        eprintln!("usage: csv_floor IN.csv OUT.csv");
        std::process::exit(2);
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_path(input)?;
    let mut writer = csv::Writer::from_path(output)?;
    let mut record = csv::ByteRecord::new();
    while reader.read_byte_record(&mut record)? {
        writer.write_byte_record(&record)?;
    }
    writer.flush()?;
    Ok(())
}
