//! Snapshot tests of what each command prints on the bundled demo, in a pipe (no colour).
//!
//! A change of wording or layout shows up as a reviewed diff of `tests/cli/snapshots/*.snap`
//! (`cargo insta review`, or `INSTA_UPDATE=always cargo test --test cli snapshots` and read the
//! diff). Ids, key fingerprints and the temporary folder differ from run to run and are masked
//! by [`mask`]; the clock is fixed by the harness.

use crate::util::TestDir;
use std::sync::OnceLock;

/// Masks what differs between runs: the binary's path, the temp folder, commit and file ids (8 or more hex
/// digits), and key fingerprints (four groups of four hex digits).
fn mask(text: &str, root: &str) -> String {
    static HEX: OnceLock<regex::Regex> = OnceLock::new();
    static PRINT: OnceLock<regex::Regex> = OnceLock::new();
    let print = PRINT.get_or_init(|| {
        regex::Regex::new(r"\b[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}\b").unwrap()
    });
    let hex = HEX.get_or_init(|| regex::Regex::new(r"\b[0-9a-f]{8,64}\b").unwrap());
    let text = text
        .replace(crate::util::BIN, "[emend]")
        .replace(root, "[dir]");
    let text = print.replace_all(&text, "[fingerprint]");
    hex.replace_all(&text, "[id]").into_owned()
}

#[test]
fn every_command_prints_the_demo_as_reviewed() {
    let dir = TestDir::new("snapshots");
    let root = dir.root().display().to_string();
    let demo = dir.cmd(["demo", "demo"]).ok();
    insta::assert_snapshot!("demo", mask(&demo.stdout(), &root));
    let run = |args: &[&str]| {
        let out = dir.run(dir.command_in("demo", ".identity", args));
        format!(
            "$ emend {}\n{}{}",
            args.join(" "),
            out.stdout(),
            match out.stderr() {
                e if e.is_empty() => String::new(),
                e => format!("[stderr]\n{e}"),
            }
        )
    };
    let cases: &[(&str, &[&str])] = &[
        ("tables", &["tables"]),
        ("log", &["log"]),
        ("status", &["status"]),
        ("show", &["show", "samples", "--rows", "410-414"]),
        ("profile", &["profile", "samples"]),
        ("profile_col", &["profile", "samples", "--col", "ph"]),
        ("diff", &["diff", "samples", "raw", "latest"]),
        ("why_cell", &["why", "samples", "S-00412", "ph"]),
        ("why_column", &["why", "samples", "--col", "turbidity_ntu"]),
        ("check_raw", &["check", "samples", "--at", "raw"]),
        ("check_latest", &["check", "samples"]),
        ("tags", &["tags"]),
        ("verify", &["verify"]),
        ("id_show", &["id", "show"]),
        ("unknown_table", &["show", "samplez"]),
    ];
    for (name, args) in cases {
        insta::assert_snapshot!(*name, mask(&run(args), &root));
    }
}
