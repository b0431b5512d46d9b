//! Issue 8: a corpus of nasty files. Each is either stored (and round-trips byte for byte) or
//! refused with a clear error; none crashes, hangs or takes unbounded memory. Peak memory is
//! read with /usr/bin/time where it is installed.

use crate::util::{TestDir, setup_store, store_state};
use std::process::Command;

/// Run emend under /usr/bin/time (when present) and return (exit code, stderr, peak KiB).
fn measured(dir: &TestDir, args: &[&str]) -> (i32, String, Option<u64>) {
    let time = std::path::Path::new("/usr/bin/time");
    let mut cmd = if time.exists() {
        let mut c = Command::new(time);
        c.arg("-f")
            .arg("PEAK_KIB=%M")
            .arg(crate::util::BIN)
            .args(args);
        c
    } else {
        let mut c = Command::new(crate::util::BIN);
        c.args(args);
        c
    };
    cmd.current_dir(dir.root())
        .env_clear()
        .env("EMEND_HOME", dir.path(crate::util::HOME))
        .env("EMEND_NOW", crate::util::NOW)
        .env("NO_COLOR", "1");
    let out = cmd.output().expect("run");
    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
    let peak = stderr
        .lines()
        .find_map(|l| l.strip_prefix("PEAK_KIB="))
        .and_then(|v| v.trim().parse().ok());
    (out.status.code().unwrap_or(-1), stderr, peak)
}

fn stored_and_round_trips(dir: &TestDir, file: &str, table: &str, max_peak_mib: u64) {
    let (code, stderr, peak) = measured(dir, &["ingest", file, "--table", table]);
    assert_eq!(code, 0, "{file}: {stderr}");
    if let Some(kib) = peak {
        assert!(
            kib / 1024 <= max_peak_mib,
            "{file}: peak {} MiB",
            kib / 1024
        );
    }
    let raw = dir.cmd(["export", table, "--raw"]).ok();
    assert_eq!(
        raw.stdout_bytes(),
        &dir.read(file)[..],
        "{file} round-trips"
    );
}

#[test]
fn nasty_files_are_stored_exactly_or_refused_clearly() {
    let dir = TestDir::new("hostile");
    setup_store(&dir);
    // A 20 MiB field.
    let mut huge = String::from("id,blob\n1,\"");
    huge.push_str(&"river ".repeat(20 * 1024 * 1024 / 6));
    huge.push_str("\"\n2,small\n");
    dir.write("huge.csv", &huge);
    stored_and_round_trips(&dir, "huge.csv", "huge", 200);
    // 100,000 columns.
    let header: Vec<String> = (0..100_000).map(|i| format!("c{i}")).collect();
    let row: Vec<String> = (0..100_000).map(|i| (i % 10).to_string()).collect();
    dir.write(
        "wide.csv",
        &format!(
            "{}\n{}\n{}\n",
            header.join(","),
            row.join(","),
            row.join(",")
        ),
    );
    stored_and_round_trips(&dir, "wide.csv", "wide", 200);
    // Deeply quoted fields: quotes doubled many times over, and quoted line breaks.
    let deep = format!("a,b\n\"{}\",\"x\r\ny\"\n", "\"\"".repeat(50_000));
    dir.write("deep.csv", &deep);
    stored_and_round_trips(&dir, "deep.csv", "deep", 100);
    // Mixed line endings and a byte-order mark in the middle (it is data there).
    dir.write_bytes("mixed.csv", b"a,b\r\n1,2\n3,\xEF\xBB\xBF4\r5,6\r\n");
    stored_and_round_trips(&dir, "mixed.csv", "mixed", 100);
    let shown = dir.cmd(["show", "mixed", "--json"]).ok().json();
    assert_eq!(shown["rows"].as_array().unwrap().len(), 3);
    // Refused with a clear message, and nothing stored.
    let before = store_state(&dir);
    for (name, bytes, needle) in [
        ("bad-utf8.csv", &b"a,b\n1,\xff\xfe\n"[..], "invalid UTF-8"),
        ("nul.csv", &b"a,b\n1,\x002\n"[..], "NUL byte"),
        (
            "open-quote.csv",
            &b"a,b\n1,\"never closed\n2,3\n"[..],
            "never closed",
        ),
        ("utf16.csv", &b"\xff\xfea\x00,\x00b\x00\n\x00"[..], "UTF-16"),
        ("stray.csv", &b"a,b\n1,5\" pipe\n"[..], "unquoted field"),
    ] {
        dir.write_bytes(name, bytes);
        let (code, stderr, _) = measured(&dir, &["ingest", name, "--table", "bad"]);
        assert_eq!(code, 2, "{name}: {stderr}");
        assert!(stderr.contains(needle), "{name}: {stderr}");
        assert!(
            stderr.contains(name),
            "{name}: the message names the file: {stderr}"
        );
    }
    assert_eq!(store_state(&dir), before);
}

/// A key column of ten million rows: the uniqueness check keeps 8 bytes per row, so memory
/// stays near 100 MiB. Long; run with `cargo test --release --test cli -- --ignored`.
#[test]
#[ignore]
fn ten_million_keys_in_bounded_memory() {
    let dir = TestDir::new("hostile_keys");
    setup_store(&dir);
    let mut s = String::with_capacity(10_000_000 * 12);
    s.push_str("id,v\n");
    for i in 0..10_000_000u64 {
        s.push_str(&format!("K{i},{}\n", i % 10));
    }
    dir.write("keys.csv", &s);
    drop(s);
    let (code, stderr, peak) =
        measured(&dir, &["ingest", "keys.csv", "--table", "k", "--key", "id"]);
    assert_eq!(code, 0, "{stderr}");
    if let Some(kib) = peak {
        eprintln!("10M-row keyed ingest: peak {} MiB", kib / 1024);
        assert!(kib / 1024 <= 300, "peak {} MiB", kib / 1024);
    }
}
