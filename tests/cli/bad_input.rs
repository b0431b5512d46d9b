//! Bad input: every refusal exits 2, says what is wrong and where, and leaves the store exactly
//! as it was (the log and the row count of every store table are compared before and after).

use crate::util::{TestDir, count, open_db, setup_store, store_state};

const GOOD: &str = "sample_id,site,ph\nRW-1,Alder Brook,7.2\nRW-2,Fennel Run,6.9\n";

/// A store with one ingested table (`samples`, key `sample_id`), one fix commit and one
/// pending fix.
fn store() -> TestDir {
    let dir = TestDir::new("bad_input");
    setup_store(&dir);
    dir.write("good.csv", GOOD);
    dir.cmd([
        "ingest",
        "good.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok();
    dir.cmd(["set", "samples", "RW-1", "ph", "7.3", "--why", "lab sheet"])
        .ok();
    dir.cmd(["commit", "-m", "first fix"]).ok();
    dir.cmd(["exclude", "samples", "RW-2", "--why", "duplicate"])
        .ok();
    dir
}

/// Run `args`, expect exit 2 naming every needle, and check the store did not change.
#[track_caller]
fn refused(dir: &TestDir, args: &[&str], needles: &[&str]) {
    let before = store_state(dir);
    dir.cmd(args).fails(needles);
    assert_eq!(
        store_state(dir),
        before,
        "`emend {}` changed the store",
        args.join(" ")
    );
}

#[test]
fn bad_extracts_are_refused_with_the_place_and_nothing_is_stored() {
    let dir = store();
    // Pending fixes would block a new extract of `samples` before the file is read.
    dir.cmd(["discard"]).ok();
    let files: &[(&str, &[u8], &[&str])] = &[
        ("empty.csv", b"", &["empty.csv", "empty"]),
        (
            "header_only.csv",
            b"a,b\n",
            &["header_only.csv", "no data rows"],
        ),
        (
            "dup_header.csv",
            b"site,ph,site\nA,1,B\n",
            &[
                "dup_header.csv:1:3",
                "duplicate column name 'site'",
                "column 1",
            ],
        ),
        (
            "empty_name.csv",
            b"site,,ph\nA,1,2\n",
            &["empty_name.csv:1:2", "empty column name"],
        ),
        (
            "ragged.csv",
            b"a,b\n1,2\n3,4\n5,6,7\n8,9\n",
            &["ragged.csv:4:", "3 fields", "has 2"],
        ),
        (
            "short_row.csv",
            b"a,b,c\n1,2,3\n4,5\n",
            &["short_row.csv:3:", "2 fields"],
        ),
        (
            // The quote opens on line 3 and is never closed.
            "unterminated.csv",
            b"a,b\n1,2\n3,\"open\n4,5\n6,7\n",
            &["unterminated.csv:3:2", "opened on line 3", "never closed"],
        ),
        (
            "stray_quote.csv",
            b"a,b\n1,x\"y\n",
            &["stray_quote.csv:2:2", "quote"],
        ),
        (
            // 0xFC (u-umlaut in Latin-1) followed by 'n' is not UTF-8; the record starts at
            // byte 8.
            "latin.csv",
            b"a,b\n1,2\n3,Gr\xfcn\n",
            &[
                "latin.csv:3:2",
                "invalid UTF-8",
                "byte offset 8",
                "--encoding",
            ],
        ),
        (
            "nul.csv",
            b"a,b\n1,2\n3,\x004\n",
            &["nul.csv:3:2", "NUL byte"],
        ),
        (
            "utf16.csv",
            b"\xff\xfea\x00,\x00b\x00\n\x00",
            &["utf16.csv:1:"],
        ),
    ];
    for (name, bytes, needles) in files {
        dir.write_bytes(name, bytes);
        refused(&dir, &["ingest", name, "--table", "other"], needles);
        // Into an existing table too.
        refused(&dir, &["ingest", name, "--table", "samples"], &[name]);
    }
}

#[test]
fn bad_keys_are_refused_with_the_rows_lines() {
    let dir = store();
    dir.write(
        "dups.csv",
        "sample_id,ph\nRW-1,7\nRW-2,7\nRW-1,8\nRW-3,6\nRW-2,9\nRW-1,5\n",
    );
    refused(
        &dir,
        &[
            "ingest",
            "dups.csv",
            "--table",
            "other",
            "--key",
            "sample_id",
        ],
        &[
            "not unique",
            "'RW-1' on lines 2, 4, 7",
            "'RW-2' on lines 3, 6",
        ],
    );
    dir.write("blank_key.csv", "sample_id,ph\nRW-1,7\n  ,8\n");
    refused(
        &dir,
        &[
            "ingest",
            "blank_key.csv",
            "--table",
            "other",
            "--key",
            "sample_id",
        ],
        &["blank_key.csv:3:1", "key column 'sample_id' is blank"],
    );
    dir.write("comp.csv", "site,day,ph\nA,1,7\nA,2,7\nA,1,8\n");
    refused(
        &dir,
        &[
            "ingest", "comp.csv", "--table", "other", "--key", "site,day",
        ],
        &["not unique", "'A,1' on lines 2, 4"],
    );
    refused(
        &dir,
        &["ingest", "comp.csv", "--table", "other", "--key", "station"],
        &["key column 'station' is not in the header", "site, day, ph"],
    );
}

#[test]
fn bad_ingest_options_are_refused() {
    let dir = store();
    refused(
        &dir,
        &["ingest", "no_such_file.csv", "--table", "other"],
        &["no_such_file.csv", "No such file"],
    );
    std::fs::create_dir(dir.path("folder.csv")).unwrap();
    refused(
        &dir,
        &["ingest", "folder.csv", "--table", "other"],
        &["folder"],
    );
    refused(
        &dir,
        &[
            "ingest",
            "good.csv",
            "--table",
            "other",
            "--encoding",
            "ebcdic",
        ],
        &["unknown --encoding 'ebcdic'"],
    );
    refused(
        &dir,
        &[
            "ingest",
            "good.csv",
            "--table",
            "other",
            "--delimiter",
            "::",
        ],
        &["--delimiter"],
    );
    refused(
        &dir,
        &["ingest", "good.csv", "--table", "bad name!"],
        &["table name 'bad name!' is not allowed"],
    );
    // Pending fixes on the table block a new extract of it.
    dir.write("good2.csv", "sample_id,site,ph\nRW-1,Alder Brook,7.2\n");
    refused(
        &dir,
        &["ingest", "good2.csv", "--table", "samples"],
        &["pending fixes"],
    );
}

#[test]
fn unknown_table_column_or_row_is_refused_by_every_fix_command() {
    let dir = store();
    let why = ["--why", "reason"];
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (
            vec!["set", "nope", "RW-1", "ph", "7"],
            "no table named 'nope'",
        ),
        (
            vec!["set", "samples", "RW-1", "colour", "7"],
            "no column 'colour'",
        ),
        (vec!["set", "samples", "RW-9", "ph", "7"], "no row 'RW-9'"),
        (
            vec!["set", "samples", "RW-9", "ph", "--missing"],
            "no row 'RW-9'",
        ),
        (
            vec!["recode", "nope", "site", "--from", "a", "--to", "b"],
            "no table named 'nope'",
        ),
        (
            vec!["recode", "samples", "colour", "--from", "a", "--to", "b"],
            "no column 'colour'",
        ),
        (
            vec!["missing", "nope", "ph", "--code", "-9"],
            "no table named 'nope'",
        ),
        (
            vec!["missing", "samples", "colour", "--code", "-9"],
            "no column 'colour'",
        ),
        (vec!["exclude", "nope", "RW-1"], "no table named 'nope'"),
        (vec!["exclude", "samples", "RW-9"], "no row 'RW-9'"),
        (vec!["distrust", "nope", "ph"], "no table named 'nope'"),
        (vec!["distrust", "samples", "colour"], "no column 'colour'"),
    ];
    for (args, needle) in cases {
        // --why goes first so that `missing --code` cannot swallow it.
        let mut full = args[..3].to_vec();
        full.extend(why);
        full.extend(&args[3..]);
        refused(&dir, &full, &[needle, "hint:"]);
    }
    // A recode with nothing to do, or of a value to itself.
    refused(
        &dir,
        &["recode", "samples", "site", "--why", "w"],
        &["--from"],
    );
    refused(
        &dir,
        &[
            "recode", "samples", "site", "--from", "a", "--to", "a", "--why", "w",
        ],
        &["to itself"],
    );
    dir.write("empty_map.csv", "from,to\n");
    refused(
        &dir,
        &[
            "recode",
            "samples",
            "site",
            "--map",
            "empty_map.csv",
            "--why",
            "w",
        ],
        &["no from,to pairs"],
    );
    dir.write("bad_map.csv", "a,b\nc\n");
    refused(
        &dir,
        &[
            "recode",
            "samples",
            "site",
            "--map",
            "bad_map.csv",
            "--why",
            "w",
        ],
        &["bad_map.csv:2", "two fields"],
    );
    // Evidence that does not exist.
    refused(
        &dir,
        &[
            "set",
            "samples",
            "RW-1",
            "ph",
            "7",
            "--why",
            "w",
            "--evidence",
            "gone.pdf",
        ],
        &["gone.pdf"],
    );
}

#[test]
fn empty_reasons_are_refused() {
    let dir = store();
    for why in ["", "  ", "\t\n"] {
        for args in [
            &["set", "samples", "RW-1", "ph", "7"][..],
            &["recode", "samples", "site", "--from", "a", "--to", "b"],
            &["missing", "samples", "ph", "--code", "-9"],
            &["exclude", "samples", "RW-1"],
            &["distrust", "samples", "ph"],
        ] {
            let mut full = args[..3].to_vec();
            full.extend(["--why", why]);
            full.extend(&args[3..]);
            refused(&dir, &full, &["every fix needs a reason", "hint:"]);
        }
    }
    // Without --why at all: a usage error.
    refused(&dir, &["exclude", "samples", "RW-1"], &["--why"]);
}

#[test]
fn key_columns_cannot_be_changed() {
    let dir = store();
    for args in [
        &["set", "samples", "RW-1", "sample_id", "RW-7", "--why", "w"][..],
        &[
            "set",
            "samples",
            "RW-1",
            "sample_id",
            "--missing",
            "--why",
            "w",
        ],
        &[
            "recode",
            "samples",
            "sample_id",
            "--from",
            "RW-1",
            "--to",
            "RW-7",
            "--why",
            "w",
        ],
        &[
            "missing",
            "samples",
            "sample_id",
            "--why",
            "w",
            "--code",
            "RW-1",
        ],
    ] {
        refused(&dir, args, &["'sample_id' is part of the key"]);
    }
    // Distrusting a key column is allowed (it changes no value).
    dir.cmd(["distrust", "samples", "sample_id", "--why", "typed by hand"])
        .ok();
}

#[test]
fn commit_needs_pending_fixes_and_a_message() {
    let dir = store();
    refused(&dir, &["commit", "-m", "  "], &["message"]);
    dir.cmd(["discard"]).ok().says(&["dropped 1 pending fix"]);
    refused(
        &dir,
        &["commit", "-m", "nothing"],
        &["nothing to commit", "hint:"],
    );
    refused(&dir, &["commit"], &["--message"]);
}

#[test]
fn second_init_is_refused() {
    let dir = store();
    refused(&dir, &["init"], &["a store already exists", "hint:"]);
}

#[test]
fn commands_outside_a_store_say_run_init() {
    let dir = TestDir::new("no_store");
    dir.cmd(["id", "new", "--name", "Test Steward"]).ok();
    dir.write("good.csv", GOOD);
    for args in [
        &["status"][..],
        &["log"],
        &["tables"],
        &["show", "samples"],
        &["export", "samples"],
        &["verify"],
        &["discard"],
        &["commit", "-m", "x"],
        &["ingest", "good.csv", "--table", "samples"],
        &["set", "samples", "RW-1", "ph", "7", "--why", "w"],
        &["exclude", "samples", "RW-1", "--why", "w"],
        &["distrust", "samples", "ph", "--why", "w"],
    ] {
        dir.cmd(args).fails(&["no emend store", "emend init"]);
    }
    assert!(!dir.path(".emend").exists(), "nothing made a store");
}

#[test]
fn a_store_file_that_is_not_ours_is_refused_untouched() {
    let dir = TestDir::new("foreign_store");
    dir.cmd(["id", "new", "--name", "Test Steward"]).ok();
    dir.write("good.csv", GOOD);
    let garbage: Vec<u8> = (0..6000u32).map(|i| (i * 7 + 13) as u8).collect();
    dir.write_bytes(".emend/store.sqlite", &garbage);
    for args in [
        &["status"][..],
        &["log", "--json"],
        &["verify"],
        &["ingest", "good.csv", "--table", "samples"],
        &["init"],
    ] {
        dir.cmd(args).fails(&[".emend/store.sqlite"]);
        assert_eq!(dir.read(".emend/store.sqlite"), garbage, "file untouched");
    }
    dir.cmd(["status"])
        .fails(&["is not an emend store", "left untouched"]);
    let files: Vec<_> = std::fs::read_dir(dir.path(".emend"))
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(files, ["store.sqlite"], "no -wal or -shm files were made");

    // A real SQLite database made by someone else.
    let other = TestDir::new("foreign_sqlite");
    std::fs::create_dir(other.path(".emend")).unwrap();
    {
        let c = rusqlite::Connection::open(other.store_file()).unwrap();
        c.execute_batch("CREATE TABLE notes (x TEXT); INSERT INTO notes VALUES ('mine');")
            .unwrap();
    }
    let bytes = other.read(".emend/store.sqlite");
    other
        .cmd(["log"])
        .fails(&["is not an emend store", "left untouched"]);
    other.cmd(["verify"]).fails(&["is not an emend store"]);
    assert_eq!(other.read(".emend/store.sqlite"), bytes);
}

#[test]
fn a_store_from_a_newer_build_is_refused() {
    let dir = store();
    open_db(&dir)
        .execute_batch("PRAGMA user_version = 99;")
        .unwrap();
    let bytes = dir.read(".emend/store.sqlite");
    for args in [
        &["status"][..],
        &["log"],
        &["verify"],
        &["exclude", "samples", "RW-1", "--why", "w"],
    ] {
        dir.cmd(args)
            .fails(&["schema v99", "reads up to v4", "upgrade emend"]);
    }
    assert_eq!(dir.read(".emend/store.sqlite"), bytes);
}

#[test]
fn usage_errors_and_help() {
    let dir = store();
    dir.cmd(["frobnicate"]).code(2);
    dir.cmd(["ingets", "good.csv"]).code(2);
    dir.cmd(["export"]).code(2);
    dir.cmd(["export", "samples", "--raw", "--na", "NA"])
        .code(2);
    dir.cmd([
        "set",
        "samples",
        "RW-1",
        "ph",
        "7",
        "--missing",
        "--why",
        "w",
    ])
    .code(2);
    let help = dir.cmd(["--help"]).ok().stdout();
    assert!(help.contains("Usage: emend"), "{help}");
    for sub in [
        "init", "id", "ingest", "tables", "show", "set", "recode", "missing", "exclude",
        "distrust", "status", "discard", "commit", "log", "export", "verify", "demo",
    ] {
        assert!(help.contains(sub), "--help lists {sub}");
        let h = dir.cmd([sub, "--help"]).ok().stdout();
        assert!(h.contains("Usage: emend"), "{sub} --help:\n{h}");
    }
    dir.cmd(["--version"]).ok().says(&["emend"]);
    dir.cmd(["show", "samples", "--rows", "5-2"])
        .fails(&["--rows"]);
}

#[test]
fn commit_and_ingest_without_an_identity_name_emend_id_new() {
    let dir = store();
    // "nobody" is an empty identity folder.
    let before = store_state(&dir);
    dir.cmd_as("nobody", ["commit", "-m", "x"])
        .fails(&["no signing identity", "emend id new"]);
    dir.write("other.csv", "a,b\n1,2\n");
    dir.cmd_as("nobody", ["ingest", "other.csv", "--table", "other"])
        .fails(&["no signing identity", "emend id new"]);
    dir.cmd_as("nobody", ["id", "show"])
        .fails(&["emend id new"]);
    assert_eq!(store_state(&dir), before);
}

#[cfg(unix)]
#[test]
fn a_key_file_others_can_read_is_refused() {
    use std::os::unix::fs::PermissionsExt;
    let dir = store();
    let key = dir.path(".identity/identity.key");
    assert_eq!(
        std::fs::metadata(&key).unwrap().permissions().mode() & 0o777,
        0o600,
        "id new makes the key file 0600"
    );
    std::fs::set_permissions(&key, std::fs::Permissions::from_mode(0o644)).unwrap();
    let before = store_state(&dir);
    dir.cmd(["commit", "-m", "x"])
        .fails(&["can be read by others", "chmod 600"]);
    dir.write("other.csv", "a,b\n1,2\n");
    dir.cmd(["ingest", "other.csv", "--table", "other"])
        .fails(&["chmod 600"]);
    assert_eq!(store_state(&dir), before);
    std::fs::set_permissions(&key, std::fs::Permissions::from_mode(0o600)).unwrap();
    dir.cmd(["commit", "-m", "x"]).ok();
}

#[test]
fn a_failed_ingest_leaves_no_chunks_behind() {
    // A ragged row far into the file: earlier pieces were already hashed and compressed.
    let dir = store();
    let chunks = count(&dir, "chunk");
    let mut text = String::from("a,b\n");
    for i in 0..40_000 {
        text.push_str(&format!("{i},value number {i} of a long enough row\n"));
    }
    text.push_str("1,2,3\n");
    dir.write("late_error.csv", &text);
    refused(
        &dir,
        &["ingest", "late_error.csv", "--table", "other"],
        &["late_error.csv:40002:"],
    );
    assert_eq!(count(&dir, "chunk"), chunks);
}

// Regression (found in review; src/cli/fixes.rs, MissingArgs::codes): `--code` takes `num_args = 1..` with
// `allow_hyphen_values = true`, so in `emend missing T COL --code -999 --why R` the values of
// --code swallow `--why R`, and clap then reports that --why is missing (exit 2). The order
// the help and the design show (`missing T COL --code V... --why R`) must work.
#[test]
fn issue_2_missing_code_then_why_is_accepted() {
    let dir = store();
    dir.write("temps.csv", "sample_id,temp\nRW-1,-999\nRW-2,12\n");
    dir.cmd(["discard"]).ok();
    dir.cmd([
        "ingest",
        "temps.csv",
        "--table",
        "temps",
        "--key",
        "sample_id",
    ])
    .ok();
    dir.cmd([
        "missing", "temps", "temp", "--code", "-999", "--why", "no meter",
    ])
    .ok();
    let status = dir.cmd(["status", "--json"]).ok().json();
    assert_eq!(status["pending"][0]["codes"], serde_json::json!(["-999"]));
    assert_eq!(status["pending"][0]["why"], "no meter");
}

// Regression (found in review; src/error.rs, Error::Io): the variant's message is "{path}: {source}" and thiserror also
// reports `source` as the error's cause, so `{err:#}` prints the OS error twice: "emend: error:
// ingesting nope.csv: nope.csv: No such file or directory (os error 2): No such file or
// directory (os error 2)".
#[test]
fn issue_2_missing_file_error_names_the_os_error_once() {
    let dir = store();
    let out = dir
        .cmd(["ingest", "nope.csv", "--table", "other"])
        .fails(&["nope.csv"]);
    let err = out.stderr();
    assert_eq!(err.matches("No such file or directory").count(), 1, "{err}");
}
