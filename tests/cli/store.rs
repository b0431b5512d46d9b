//! The store over time: later extracts of a table, the log of one table, pending fixes, and
//! stores made by an earlier build.

use crate::util::{TestDir, count, setup_store, store_state};
use crate::walkthrough::RIVER_CSV;

fn river_store(name: &str) -> TestDir {
    let dir = TestDir::new(name);
    setup_store(&dir);
    crate::util::ingest_river(&dir);
    dir
}

#[test]
fn a_later_extract_is_a_new_version_and_history_keeps_the_old_one() {
    let dir = river_store("later_extract");
    dir.cmd([
        "set",
        "samples",
        "RW-002",
        "ph",
        "7.1",
        "--why",
        "lab sheet",
    ])
    .ok();
    dir.cmd(["commit", "-m", "fix"]).ok();
    let october = RIVER_CSV.replace("RW-007,Fennel Rn", "RW-007,Fennel Run")
        + "RW-008,Quillet Marsh,2026-10-02,7.3,11.0,2.0,vol-03,no\n";
    dir.write("october.csv", &october);
    dir.cmd([
        "ingest",
        "october.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok()
    .says(&["commit 3", "8 rows"]);
    // Latest is the new extract as received (fixes are not carried over in this issue).
    assert_eq!(dir.cmd(["export", "samples"]).ok().stdout(), october);
    assert_eq!(
        dir.cmd(["export", "samples", "--raw"]).ok().stdout(),
        october
    );
    // The older versions are still there.
    let at2 = dir.cmd(["export", "samples", "--at", "2"]).ok().stdout();
    assert!(at2.contains("RW-002,alder brook,2026-09-01,7.1,"), "{at2}");
    assert_eq!(
        dir.cmd(["export", "samples", "--at", "1", "--raw"])
            .ok()
            .stdout(),
        RIVER_CSV
    );
    let tables = dir.cmd(["tables", "--json"]).ok().json();
    assert_eq!(tables["tables"][0]["extracts"], 2);
    assert_eq!(tables["tables"][0]["extract_commit"], 3);
    dir.cmd(["verify"]).ok();
}

#[test]
fn discard_drops_pending_fixes_only() {
    let dir = river_store("discard");
    dir.cmd(["exclude", "samples", "RW-004", "--why", "duplicate"])
        .ok();
    dir.cmd(["distrust", "samples", "volunteer", "--why", "free text"])
        .ok();
    assert_eq!(count(&dir, "pending"), 2);
    dir.cmd(["discard"]).ok().says(&["dropped 2 pending fixes"]);
    assert_eq!(count(&dir, "pending"), 0);
    assert_eq!(count(&dir, "commit_log"), 1);
    assert_eq!(dir.cmd(["export", "samples"]).ok().stdout(), RIVER_CSV);
    dir.cmd(["status"]).ok().says(&["no pending fixes"]);
}

#[test]
fn a_fix_that_changes_nothing_is_recorded_with_a_note() {
    let dir = river_store("no_op_fix");
    dir.cmd([
        "set",
        "samples",
        "RW-001",
        "ph",
        "7.2",
        "--why",
        "confirmed",
    ])
    .ok()
    .says(&["already holds this value"]);
    // A recode that matches no cell is a misspelt value until said otherwise.
    dir.cmd([
        "recode", "samples", "site", "--from", "Nowhere", "--to", "X", "--why", "w",
    ])
    .fails(&["changes no cell", "--allow-empty"]);
    dir.cmd([
        "recode",
        "samples",
        "site",
        "--from",
        "Nowhere",
        "--to",
        "X",
        "--why",
        "w",
        "--allow-empty",
    ])
    .ok();
    dir.cmd(["commit", "-m", "no-ops"])
        .ok()
        .says(&["0 cells changed", "(changed no cell)"]);
    assert_eq!(dir.cmd(["export", "samples"]).ok().stdout(), RIVER_CSV);
    dir.cmd(["verify"]).ok();
}

// Regression (found in review; src/cli/look.rs, fn log; the same call in src/history/mod.rs, fn ingest):
// `reader.extract_at(t, u64::MAX)` binds `u64::MAX as i64`, which is -1, so the query
// `seq <= -1` never matches. `emend log samples` answers "no table named 'samples'" (exit 2)
// for every table.
#[test]
fn issue_2_log_of_one_table_lists_its_commits() {
    let dir = river_store("log_table");
    dir.write("other.csv", "a,b\n1,2\n");
    dir.cmd(["ingest", "other.csv", "--table", "other"]).ok();
    dir.cmd(["exclude", "samples", "RW-004", "--why", "duplicate"])
        .ok();
    dir.cmd(["commit", "-m", "exclude"]).ok();
    let log = dir.cmd(["log", "samples", "--json"]).ok().json();
    let seqs: Vec<u64> = log["commits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["seq"].as_u64().unwrap())
        .collect();
    assert_eq!(seqs, [1, 3]);
    dir.cmd(["log", "other"]).ok().says(&["No. 2"]);
    dir.cmd(["log", "nope"]).fails(&["no table named 'nope'"]);
}

// Regression (found in review; src/history/mod.rs, fn ingest, `extract_at(&opts.table, u64::MAX)` as above): the
// previous extract is never found, so a later extract ingested without --key does not reuse
// the table's key (the --key help says "A later extract of a table reuses its key"): the
// table silently becomes keyless and rows are then named by position.
#[test]
fn issue_2_a_later_extract_reuses_the_tables_key() {
    let dir = river_store("key_reuse");
    let october = RIVER_CSV.replace("71,", "7.1,");
    dir.write("october.csv", &october);
    dir.cmd(["ingest", "october.csv", "--table", "samples"])
        .ok();
    let tables = dir.cmd(["tables", "--json"]).ok().json();
    assert_eq!(tables["tables"][0]["key"], serde_json::json!(["sample_id"]));
    dir.cmd(["exclude", "samples", "RW-004", "--why", "duplicate"])
        .ok();
}

// Regression (found in review; src/history/mod.rs, fn ingest, same cause): ingesting the bytes that are already the
// newest extract of a table must be refused ("already the newest extract"); today it makes a
// new commit with an identical extract.
#[test]
fn issue_2_ingesting_the_newest_extract_again_is_refused() {
    let dir = river_store("same_again");
    let before = store_state(&dir);
    dir.cmd([
        "ingest",
        "river.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .fails(&["already the newest extract"]);
    assert_eq!(store_state(&dir), before);
}

#[test]
fn only_the_newest_extract_keeps_a_row_map_and_older_ones_are_still_found() {
    let dir = river_store("row_map_newest");
    assert_eq!(count(&dir, "row_map"), 1);
    let october = RIVER_CSV.replace("RW-007,Fennel Rn", "RW-007,Fennel Run");
    dir.write("october.csv", &october);
    dir.cmd(["ingest", "october.csv", "--table", "samples"])
        .ok();
    assert_eq!(count(&dir, "row_map"), 1);
    // The older extract is read in full; the newer through its map; both answer alike.
    let old = dir
        .cmd(["show", "samples", "RW-007", "--at", "1", "--json"])
        .ok()
        .json();
    assert_eq!(old["rows"][0]["cells"][1], "Fennel Rn");
    let new = dir.cmd(["show", "samples", "RW-007", "--json"]).ok().json();
    assert_eq!(new["rows"][0]["cells"][1], "Fennel Run");
    let by_pos = dir.cmd(["show", "samples", "#7", "--json"]).ok().json();
    assert_eq!(by_pos["rows"][0]["row"], "RW-007");
    let range = dir
        .cmd(["show", "samples", "--rows", "6-7", "--json"])
        .ok()
        .json();
    assert_eq!(range["rows"].as_array().unwrap().len(), 2);
    dir.cmd(["verify"]).ok();
}
