//! Fuzz a store file with bytes changed: a small store (an ingest and a fix commit) is built
//! once; each input names positions and new bytes to write into a copy of its file. Every
//! command path tried (open, the read check, verify, rebuild and export) must fail with an
//! error or succeed, never panic or hang; and when the read check passes, verify must find no
//! problem in the chain, the signatures or the derived rows (a read never trusts what verify
//! would reject there; stored bytes are checked as they are read).
#![no_main]

use emend::ingest::IngestOptions;
use emend::ledger::{CommitContext, ingest};
use emend::query::verify::{Trust, verify};
use emend::signing::Signer;
use emend::store::Store;
use libfuzzer_sys::fuzz_target;
use std::sync::OnceLock;

fn template() -> &'static Vec<u8> {
    static BYTES: OnceLock<Vec<u8>> = OnceLock::new();
    BYTES.get_or_init(|| {
        let dir = tempfile::tempdir().expect("a temp folder");
        let file = dir.path().join("river.csv");
        std::fs::write(
            &file,
            "id,site,ph\nA1,Alder Brook,7.2\nA2,alder brook,71\nA3,Fennel Run,6.8\n",
        )
        .expect("write");
        let mut store = Store::init(dir.path(), "2026-01-01T00:00:00Z").expect("init");
        let signer = Signer::from_seed(&[9; 32]);
        let ctx = CommitContext {
            signer: &signer,
            name: "Fuzz".into(),
            email: None,
            now: "2026-01-01T00:00:00Z".into(),
        };
        let opts = IngestOptions {
            table: "samples".into(),
            key: vec!["id".into()],
            delimiter: None,
            encoding: None,
            max_field: None,
            ..Default::default()
        };
        ingest(&mut store, &file, &opts, "", &ctx).expect("ingest");
        let path = store.path().to_path_buf();
        // One file, no write-ahead log beside it.
        drop(store);
        let conn = rusqlite::Connection::open(&path).expect("reopen");
        conn.execute_batch("PRAGMA wal_checkpoint(TRUNCATE); PRAGMA journal_mode = DELETE;")
            .expect("checkpoint");
        drop(conn);
        std::fs::read(&path).expect("read the store")
    })
}

fuzz_target!(|data: &[u8]| {
    let mut bytes = template().clone();
    // Each 3-byte group: a position (2 bytes, scaled to the file) and the byte to write.
    for w in data.chunks_exact(3) {
        let at = (usize::from(w[0]) << 8 | usize::from(w[1])) * bytes.len() / 65536;
        bytes[at] = w[2];
    }
    let dir = tempfile::tempdir().expect("a temp folder");
    let folder = dir.path().join(".emend");
    std::fs::create_dir_all(&folder).expect("folder");
    std::fs::write(folder.join("store.sqlite"), &bytes).expect("write");
    let Ok(store) = Store::discover(dir.path()) else {
        return;
    };
    let reader = store.read();
    let passes = emend::query::guard::check(&reader).is_ok();
    let report = verify(&reader, &Trust::Store, &mut |_| {});
    if passes {
        // The read check covers the chain and the derived rows; stored bytes are checked as
        // they are read, so a rebuild either fails or matches.
        if let Ok(v) = emend::query::Version::load(&reader, "samples", u64::MAX, false) {
            let mut out = Vec::new();
            let _ = emend::views::export::export_version(&reader, &v, &Default::default(), &mut out);
        }
        if let Ok(report) = report {
            // Stored bytes are checked as they are read, not by the read check: a version that
            // cannot be rebuilt, or does not match, is verify's to find (and a read's to refuse).
            let about_stored_bytes = |what: &str| {
                what.contains("rebuilt") || what.contains("is not stored") || what.contains("rows, the commit says")
            };
            let chain_or_index = report.problems.iter().any(|p| {
                (p.object.starts_with("commit ") && !about_stored_bytes(&p.what))
                    || p.object.contains("index")
                    || p.object == "store file"
            });
            assert!(!chain_or_index, "the read check passed what verify rejects: {:?}", report.problems);
        }
    }
});
