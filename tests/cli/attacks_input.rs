//! Issue 16, the input side: whoever holds a file can change it while emend reads it, or hand
//! emend something that is not a file at all. Each test is named after the attack; every
//! refusal leaves the store exactly as it was (its log and the row count of every table).

use crate::util::{TestDir, setup_store, store_state};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

/// A store holding a small keyed table `samples`, ready for fixes.
fn store_with_samples(name: &str) -> TestDir {
    let dir = TestDir::new(name);
    setup_store(&dir);
    dir.write(
        "samples.csv",
        "sample_id,site,ph\nS-1,Mill Creek,7.1\nS-2,Weir,6.8\n",
    );
    dir.cmd([
        "ingest",
        "samples.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok();
    dir
}

/// Make a FIFO with the system's `mkfifo`.
fn mkfifo(path: &Path) {
    let status = Command::new("mkfifo")
        .arg(path)
        .status()
        .expect("run mkfifo");
    assert!(status.success(), "mkfifo {}", path.display());
}

/// Write `bytes` into the FIFO at `path` from another thread (the open blocks until emend
/// opens the other end).
fn feed_fifo(path: PathBuf, bytes: Vec<u8>) -> std::thread::JoinHandle<()> {
    std::thread::spawn(move || {
        let mut w = std::fs::OpenOptions::new()
            .write(true)
            .open(&path)
            .expect("open fifo for writing");
        for piece in bytes.chunks(4096) {
            w.write_all(piece).expect("write fifo");
        }
    })
}

#[test]
fn a_file_still_being_written_while_it_is_ingested_is_refused() {
    let dir = TestDir::new("attack_growing_file");
    setup_store(&dir);
    // Large enough that reading it takes a while, and a writer that keeps appending rows to
    // it from before emend starts until emend has exited: the size at open is never the size
    // at the end.
    let mut csv = String::from("sample_id,site,ph\n");
    for i in 0..200_000 {
        csv.push_str(&format!("S-{i},Mill Creek,7.{}\n", i % 10));
    }
    let path = dir.write("growing.csv", &csv);
    let before = store_state(&dir);
    let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    let writer = {
        let stop = stop.clone();
        let path = path.clone();
        std::thread::spawn(move || {
            let mut f = std::fs::OpenOptions::new()
                .append(true)
                .open(&path)
                .expect("open for append");
            let mut i = 1_000_000u64;
            while !stop.load(std::sync::atomic::Ordering::Relaxed) {
                f.write_all(format!("S-{i},Weir,6.5\n").as_bytes())
                    .expect("append");
                i += 1;
                std::thread::sleep(std::time::Duration::from_micros(200));
            }
        })
    };
    // Let the writer start appending before emend opens the file.
    std::thread::sleep(std::time::Duration::from_millis(20));
    let out = dir.cmd([
        "ingest",
        "growing.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ]);
    stop.store(true, std::sync::atomic::Ordering::Relaxed);
    writer.join().unwrap();
    out.fails(&[
        "growing.csv changed while it was being read",
        "wait until it is completely written and try again",
    ]);
    assert_eq!(store_state(&dir), before);
}

#[test]
fn duplicate_keys_are_named_from_the_one_read_of_the_file() {
    // The listing of duplicate keys reads the same open handle again (and checks it read the
    // same bytes), so what it names is what the first pass saw.
    let dir = store_with_samples("attack_duplicates_second_read");
    let before = store_state(&dir);
    dir.write(
        "dups.csv",
        "sample_id,site,ph\nS-1,Mill Creek,7.1\nS-2,Weir,6.8\nS-1,Ford,7.0\n",
    );
    dir.cmd(["ingest", "dups.csv", "--table", "samples"])
        .fails(&[
            "dups.csv",
            "key (sample_id) is not unique",
            "'S-1' on lines 2, 4",
        ]);
    assert_eq!(store_state(&dir), before);
}

#[test]
fn a_fifo_as_the_extract_is_read_once_and_stored_byte_for_byte() {
    let dir = TestDir::new("attack_fifo_extract");
    setup_store(&dir);
    let fifo = dir.path("extract.fifo");
    mkfifo(&fifo);
    let csv = "sample_id,site,ph\nS-1,Mill Creek,7.1\nS-2,Weir,6.8\nS-1,Ford,7.0\n";
    // A FIFO gives its bytes once: duplicate keys are still listed (from the private copy).
    let before = store_state(&dir);
    let feeder = feed_fifo(fifo.clone(), csv.as_bytes().to_vec());
    dir.cmd([
        "ingest",
        "extract.fifo",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .fails(&["extract.fifo", "'S-1' on lines 2, 4"]);
    feeder.join().unwrap();
    assert_eq!(store_state(&dir), before);
    // And a good one is stored exactly.
    let mut big = String::from("sample_id,site,ph\n");
    for i in 0..20_000 {
        big.push_str(&format!("S-{i},Mill Creek,7.{}\n", i % 10));
    }
    let feeder = feed_fifo(fifo.clone(), big.as_bytes().to_vec());
    dir.cmd([
        "ingest",
        "extract.fifo",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok()
    .says(&["20000 rows × 3 columns"]);
    feeder.join().unwrap();
    let raw = dir.cmd(["export", "samples", "--raw"]).ok();
    assert_eq!(raw.stdout_bytes(), big.as_bytes());
    // No private copy is left beside the store.
    let left: Vec<_> = std::fs::read_dir(dir.path(".emend"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| !n.starts_with("store.sqlite"))
        .collect();
    assert!(left.is_empty(), "left in .emend: {left:?}");
}

#[test]
fn dash_reads_the_extract_from_standard_input() {
    let dir = TestDir::new("attack_stdin_extract");
    setup_store(&dir);
    let mut csv = String::from("sample_id,site,ph\n");
    for i in 0..30_000 {
        csv.push_str(&format!("S-{i},Weir,6.{}\n", i % 10));
    }
    let mut c = dir.command(["ingest", "-", "--table", "samples", "--key", "sample_id"]);
    c.stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let mut child = c.spawn().expect("spawn");
    let mut stdin = child.stdin.take().unwrap();
    let bytes = csv.clone().into_bytes();
    let writer = std::thread::spawn(move || stdin.write_all(&bytes).expect("write stdin"));
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let said = String::from_utf8_lossy(&out.stdout);
    assert!(said.contains("30000 rows × 3 columns"), "{said}");
    let raw = dir.cmd(["export", "samples", "--raw"]).ok();
    assert_eq!(raw.stdout_bytes(), csv.as_bytes());
    // A bad extract on standard input is refused by that name, and nothing is stored.
    let before = store_state(&dir);
    let mut c = dir.command(["ingest", "-", "--table", "other"]);
    c.stdin(Stdio::piped()).stderr(Stdio::piped());
    let mut child = c.spawn().expect("spawn");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(b"a,b\n1,2\n3\n")
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("<stdin>:3:0: row has 1 fields"), "{err}");
    assert_eq!(store_state(&dir), before);
}

#[test]
fn a_fifo_as_evidence_is_stored_and_read_before_the_store_is_locked() {
    let dir = store_with_samples("attack_fifo_evidence");
    let fifo = dir.path("lab_sheet.fifo");
    mkfifo(&fifo);
    let sheet = b"lab sheet S-1: pH 7.4 on the bench meter\n".repeat(1000);
    let mut slow = dir.command([
        "set",
        "samples",
        "S-1",
        "ph",
        "7.4",
        "--why",
        "lab sheet",
        "--evidence",
        "lab_sheet.fifo",
    ]);
    slow.stdout(Stdio::piped()).stderr(Stdio::piped());
    let child = slow.spawn().expect("spawn");
    // Open the writing end only once emend holds the reading end (a non-blocking open for
    // writing fails until then): from here on emend waits on the pipe's bytes.
    let mut w = loop {
        // O_NONBLOCK on Linux.
        use std::os::unix::fs::OpenOptionsExt;
        match std::fs::OpenOptions::new()
            .write(true)
            .custom_flags(0o4000)
            .open(&fifo)
        {
            Ok(w) => break w,
            Err(_) => std::thread::sleep(std::time::Duration::from_millis(5)),
        }
    };
    // While it waits, the store is not locked: another writer records its fix at once.
    dir.cmd(["set", "samples", "S-2", "ph", "6.9", "--why", "re-read"])
        .ok();
    // Back to blocking writes for the bytes themselves.
    let mut sheet_left = &sheet[..];
    while !sheet_left.is_empty() {
        match w.write(sheet_left) {
            Ok(n) => sheet_left = &sheet_left[n..],
            Err(e) if e.kind() == std::io::ErrorKind::WouldBlock => {
                std::thread::sleep(std::time::Duration::from_millis(1))
            }
            Err(e) => panic!("write fifo: {e}"),
        }
    }
    drop(w);
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let hash = blake3::hash(&sheet).to_hex();
    let back = dir.cmd(["evidence", &hash[..16]]).ok();
    assert_eq!(back.stdout_bytes(), &sheet[..]);
}

#[test]
fn dev_zero_as_evidence_is_refused_at_once_and_the_store_is_unchanged() {
    let dir = store_with_samples("attack_dev_zero_evidence");
    let before = store_state(&dir);
    dir.cmd([
        "set",
        "samples",
        "S-1",
        "ph",
        "7.4",
        "--why",
        "lab sheet",
        "--evidence",
        "/dev/zero",
    ])
    .fails(&[
        "/dev/zero is a character device, not a file or a pipe",
        "hint: give a regular file or a pipe",
    ]);
    assert_eq!(store_state(&dir), before);
    // The store was never locked: the next writer goes ahead.
    dir.cmd(["set", "samples", "S-1", "ph", "7.4", "--why", "lab sheet"])
        .ok();
}

#[test]
fn devices_and_folders_as_inputs_are_refused_naming_the_file() {
    let dir = store_with_samples("attack_devices_as_inputs");
    let before = store_state(&dir);
    std::fs::create_dir(dir.path("sheets")).unwrap();
    dir.cmd(["ingest", "/dev/null", "--table", "other"])
        .fails(&["/dev/null is a character device, not a file or a pipe"]);
    dir.cmd(["ingest", "sheets", "--table", "other"])
        .fails(&["sheets is a folder, not a file"]);
    dir.cmd(["rules", "samples", "/dev/zero", "--why", "bounds"])
        .fails(&["/dev/zero is a character device"]);
    dir.cmd([
        "set",
        "samples",
        "S-1",
        "ph",
        "7.4",
        "--why",
        "x",
        "--evidence",
        "sheets",
    ])
    .fails(&["sheets is a folder, not a file"]);
    dir.cmd([
        "recode",
        "samples",
        "site",
        "--map",
        "/dev/zero",
        "--why",
        "x",
    ])
    .fails(&["/dev/zero is a character device"]);
    dir.cmd(["decisions", "apply", "samples", "/dev/zero", "--why", "x"])
        .fails(&["/dev/zero is a character device"]);
    assert_eq!(store_state(&dir), before);
}

#[test]
fn evidence_over_the_size_limit_is_refused_with_how_to_raise_it() {
    let dir = store_with_samples("attack_evidence_too_large");
    dir.write_bytes("scan.bin", &vec![7u8; 2 * 1024 * 1024 + 1]);
    let before = store_state(&dir);
    let mut c = dir.command([
        "set",
        "samples",
        "S-1",
        "ph",
        "7.4",
        "--why",
        "scan",
        "--evidence",
        "scan.bin",
    ]);
    c.env("EMEND_MAX_EVIDENCE_MIB", "2");
    dir.run(c).fails(&[
        "scan.bin is larger than the limit of 2 MiB for evidence and rules files",
        "EMEND_MAX_EVIDENCE_MIB",
    ]);
    assert_eq!(store_state(&dir), before);
    let mut c = dir.command([
        "set",
        "samples",
        "S-1",
        "ph",
        "7.4",
        "--why",
        "scan",
        "--evidence",
        "scan.bin",
    ]);
    c.env("EMEND_MAX_EVIDENCE_MIB", "3");
    dir.run(c).ok();
}

#[test]
fn a_million_column_header_is_stored_and_a_repeated_name_at_its_end_is_found() {
    let dir = TestDir::new("attack_million_columns");
    setup_store(&dir);
    let n = 1_000_000;
    let header: Vec<String> = (0..n).map(|i| format!("c{i}")).collect();
    let row: Vec<&str> = (0..n).map(|i| if i % 2 == 0 { "1" } else { "" }).collect();
    let csv = format!("{}\n{}\n", header.join(","), row.join(","));
    dir.write("wide.csv", &csv);
    dir.cmd(["ingest", "wide.csv", "--table", "wide"])
        .ok()
        .says(&["1 rows × 1000000 columns"]);
    let raw = dir.cmd(["export", "wide", "--raw"]).ok();
    assert_eq!(raw.stdout_bytes(), csv.as_bytes());
    // The same header with its last name repeating the first: found in one pass.
    let before = store_state(&dir);
    let mut dup = header.clone();
    dup[n - 1] = "c0".into();
    dir.write(
        "dup_wide.csv",
        &format!("{}\n{}\n", dup.join(","), row.join(",")),
    );
    dir.cmd(["ingest", "dup_wide.csv", "--table", "dup_wide"])
        .fails(&["dup_wide.csv:1:1000000: duplicate column name 'c0' (also column 1)"]);
    assert_eq!(store_state(&dir), before);
    // More columns than a table may have are refused, naming where.
    let too_many = format!("{}\n", vec!["x"; (1 << 20) + 1].join(","));
    dir.write("too_wide.csv", &too_many);
    dir.cmd(["ingest", "too_wide.csv", "--table", "too_wide"])
        .fails(&["too_wide.csv:1:1048577: the record has more than 1048576 fields"]);
    assert_eq!(store_state(&dir), before);
}

#[test]
fn a_field_over_the_maximum_is_refused_naming_line_and_column() {
    let dir = TestDir::new("attack_field_too_large");
    setup_store(&dir);
    // A 2 MiB quoted field, with line breaks in it, on the third line, in the second column.
    let field = "river\n".repeat(2 * 1024 * 1024 / 6 + 1);
    let csv = format!("id,notes\n1,short\n2,\"{field}\"\n3,short\n");
    dir.write("long.csv", &csv);
    let before = store_state(&dir);
    let mut c = dir.command(["ingest", "long.csv", "--table", "notes"]);
    c.env("EMEND_MAX_FIELD_MIB", "2");
    dir.run(c).fails(&[
        "long.csv:3:2: the record is longer than the limit of 2 MiB",
        "EMEND_MAX_FIELD_MIB",
    ]);
    assert_eq!(store_state(&dir), before);
    let mut c = dir.command(["ingest", "long.csv", "--table", "notes"]);
    c.env("EMEND_MAX_FIELD_MIB", "many");
    dir.run(c)
        .fails(&["EMEND_MAX_FIELD_MIB='many' is not a whole number of MiB"]);
    assert_eq!(store_state(&dir), before);
    // Raised, it is stored exactly.
    let mut c = dir.command(["ingest", "long.csv", "--table", "notes"]);
    c.env("EMEND_MAX_FIELD_MIB", "3");
    dir.run(c).ok().says(&["3 rows × 2 columns"]);
    let raw = dir.cmd(["export", "notes", "--raw"]).ok();
    assert_eq!(raw.stdout_bytes(), csv.as_bytes());
}
