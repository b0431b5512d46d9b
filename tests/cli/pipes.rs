//! Output to pipes: a reader that goes away early (`emend export big | head`) is not an error,
//! and output that is not a terminal carries no ANSI escapes.

use crate::util::{TestDir, assert_no_ansi, setup_store};
use std::io::Read;
use std::process::Stdio;

/// A store with a 3,000-row table (about 150 KB exported, more than a pipe buffer) and a fix
/// commit, so log, show and export all have something to write.
fn big_store() -> TestDir {
    let dir = TestDir::new("pipes");
    setup_store(&dir);
    let mut csv = String::from("sample_id,site,ph,notes\n");
    for i in 1..=3000 {
        csv.push_str(&format!(
            "S-{i:05},Site {},{}.{},routine visit with a longer note {i}\n",
            i % 8,
            6 + i % 3,
            i % 10
        ));
    }
    dir.write("big.csv", &csv);
    dir.cmd(["ingest", "big.csv", "--table", "big", "--key", "sample_id"])
        .ok();
    for i in 1..=30 {
        dir.cmd([
            "set",
            "big",
            &format!("S-{i:05}"),
            "ph",
            "7.0",
            "--why",
            "recalibrated meter",
        ])
        .ok();
    }
    dir.cmd(["commit", "-m", "recalibration"]).ok();
    dir
}

/// Run with stdout a pipe whose reader is closed at once (before anything is read, or after
/// `read_first` bytes). Returns (exit code, stderr).
fn closed_pipe(dir: &TestDir, args: &[&str], read_first: usize) -> (Option<i32>, String) {
    let mut c = dir.command(args);
    c.stdout(Stdio::piped()).stderr(Stdio::piped());
    let mut child = c.spawn().expect("spawn");
    let mut out = child.stdout.take().expect("stdout");
    if read_first > 0 {
        let mut buf = vec![0u8; read_first];
        out.read_exact(&mut buf).expect("first bytes");
    }
    drop(out);
    let mut err = String::new();
    child
        .stderr
        .take()
        .expect("stderr")
        .read_to_string(&mut err)
        .unwrap();
    let status = child.wait().expect("wait");
    (status.code(), err)
}

const PLAIN: &[&[&str]] = &[
    &["log"],
    &["show", "big", "--rows", "1-3000"],
    &["export", "big"],
    &["export", "big", "--raw"],
    &["export", "big", "--at", "raw"],
    &["tables"],
    &["status"],
    &["verify"],
];

const JSON: &[&[&str]] = &[
    &["log", "--json"],
    &["show", "big", "--rows", "1-3000", "--json"],
    &["tables", "--json"],
    &["status", "--json"],
    &["verify", "--json"],
    &["id", "show", "--json"],
];

#[test]
fn a_closed_pipe_is_not_an_error() {
    let dir = big_store();
    for args in PLAIN {
        for read_first in [0, 100] {
            if read_first > 0 && matches!(args[0], "tables" | "status" | "verify" | "log") {
                continue; // shorter than the bytes we would wait for
            }
            let (code, err) = closed_pipe(&dir, args, read_first);
            assert!(
                !err.to_lowercase().contains("error"),
                "`emend {}` (reader gone after {read_first} bytes) printed: {err}",
                args.join(" ")
            );
            assert_eq!(code, Some(0), "`emend {}`: {err}", args.join(" "));
        }
    }
}

// Regression: JSON output goes through serde_json, whose io failure arrives as a
// serde_json::Error; until src/cli/mod.rs is_broken_pipe looked inside it (fixed during this
// session), `emend log --json | head -1` printed "emend: error: Broken pipe" and exited 2.
#[test]
fn json_output_to_a_closed_pipe_is_not_an_error() {
    let dir = big_store();
    let mut failures = Vec::new();
    for args in JSON {
        let (code, err) = closed_pipe(&dir, args, 0);
        if code != Some(0) || err.to_lowercase().contains("error") {
            failures.push(format!(
                "`emend {}`: exit {code:?}, stderr {err:?}",
                args.join(" ")
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn output_has_no_ansi_escapes_when_not_a_terminal() {
    let dir = big_store();
    dir.write("dup.csv", "a,a\n1,2\n");
    let runs: &[&[&str]] = &[
        &["log"],
        &["show", "big", "--rows", "1-5"],
        &["tables"],
        &["status"],
        &["verify"],
        &["id", "show"],
        &["set", "big", "S-00040", "ph", "7.0", "--why", "again"],
        &["status"],
        &["commit", "-m", "one more"],
        &["show", "big", "--rows", "40"],
        &["export", "big", "--rows"],
        &["ingest", "dup.csv", "--table", "dup"],
        &["set", "big", "S-99999", "ph", "7.0", "--why", "w"],
        &["verify", "--trust", "nothing.txt"],
        &["--help"],
    ];
    // Both with NO_COLOR and without it: stdout and stderr are pipes here, so no colour.
    for no_color in [true, false] {
        for args in runs {
            let mut c = dir.command(*args);
            if !no_color {
                c.env_remove("NO_COLOR");
                c.env("TERM", "xterm-256color");
                c.env("CLICOLOR", "1");
            }
            let out = dir.run(c);
            let what = format!("`emend {}` (NO_COLOR {no_color})", args.join(" "));
            assert_no_ansi(
                &format!("stdout of {what}"),
                &String::from_utf8_lossy(out.stdout_bytes()),
            );
            assert_no_ansi(&format!("stderr of {what}"), &out.stderr());
        }
    }
    // A failing command still says `emend: error:` plainly.
    let mut c = dir.command(["show", "nope"]);
    c.env_remove("NO_COLOR");
    let out = dir.run(c).code(2);
    assert!(
        out.stderr()
            .starts_with("emend: error: no table named 'nope'\nhint: "),
        "{}",
        out.stderr()
    );
}
