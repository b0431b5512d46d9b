//! Fuzz ingest through the store: any bytes, as a file, are either stored (then verify finds
//! the store intact and the raw export gives back exactly those bytes) or refused with an
//! error, and a refusal leaves the store without a commit. Never a panic or a hang.
#![no_main]

use emend::ingest::IngestOptions;
use emend::ledger::{CommitContext, ingest};
use emend::query::verify::{Trust, verify};
use emend::signing::Signer;
use emend::store::Store;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Some((&first, rest)) = data.split_first() else {
        return;
    };
    let dir = tempfile::tempdir().expect("a temp folder");
    let file = dir.path().join(if first & 1 == 0 { "extract.csv" } else { "extract.tsv" });
    std::fs::write(&file, rest).expect("write the input");
    let mut store = Store::init(dir.path(), "2026-01-01T00:00:00Z").expect("init");
    let signer = Signer::from_seed(&[9; 32]);
    let ctx = CommitContext {
        signer: &signer,
        name: "Fuzz".into(),
        email: None,
        now: "2026-01-01T00:00:00Z".into(),
    };
    // The first line's first field as a key, some of the time.
    let key = if first & 2 == 2 {
        rest.split(|&b| b == b',' || b == b'\n' || b == b'\t')
            .next()
            .and_then(|k| std::str::from_utf8(k).ok())
            .map(|k| vec![k.trim().to_string()])
            .unwrap_or_default()
    } else {
        Vec::new()
    };
    let opts = IngestOptions {
        table: "t".into(),
        key,
        delimiter: None,
        encoding: None,
        max_field: None,
        ..Default::default()
    };
    match ingest(&mut store, &file, &opts, "", &ctx) {
        Ok((done, outcome)) => {
            assert_eq!(done.seq, 1);
            let reader = store.read();
            emend::query::guard::check(&reader).expect("a fresh store passes the read check");
            let report = verify(&reader, &Trust::Store, &mut |_| {}).expect("verify runs");
            assert!(report.is_clean(), "{:?}", report.problems);
            let mut back = Vec::new();
            emend::views::export::export_raw(&reader, &outcome.record.extract, &mut back)
                .expect("raw export");
            assert_eq!(back, rest, "stored byte for byte");
        }
        Err(_) => {
            assert!(store.read().head().expect("head").is_none(), "a refusal stores no commit");
        }
    }
});
