//! Issue 15: history that tells the truth. Counts of changed cells are distinct cells, net;
//! pending fixes belong to whoever recorded them. Data: small invented tables.

use crate::util::{TestDir, setup_store};

#[test]
fn a_cell_changed_twice_in_one_commit_counts_once_everywhere() {
    let dir = TestDir::new("history_counts");
    setup_store(&dir);
    dir.write("s.csv", "id,v\nA,-999\nB,-999\nC,3\n");
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok();
    // A is declared missing, then set: two edits of one cell. Worked by hand: A and B change,
    // C does not, so 2 cells.
    dir.cmd(["missing", "s", "v", "--code", "-999", "--why", "code"])
        .ok();
    dir.cmd(["set", "s", "A", "v", "5", "--why", "the paper form says 5"])
        .ok();
    dir.cmd(["commit", "-m", "pass"])
        .ok()
        .says(&["2 fixes, 2 cells changed"]);
    dir.cmd(["log"])
        .ok()
        .says(&["2 fixes to s, 2 cells changed"]);
    let d = dir
        .cmd(["diff", "s", "raw", "latest", "--json"])
        .ok()
        .json();
    assert_eq!(
        d["tables"][0]["cells"].as_array().unwrap().len(),
        2,
        "{d:#}"
    );
    dir.cmd(["report", "s", "-o", "r.html"]).ok();
    let html = String::from_utf8(dir.read("r.html")).unwrap();
    let doc = scraper::Html::parse_document(&html);
    let sel = scraper::Selector::parse("dl.glance div").unwrap();
    let changed = doc
        .select(&sel)
        .map(|d| d.text().collect::<String>())
        .find(|t| t.starts_with("cells changed"))
        .expect("a cells-changed figure");
    assert_eq!(changed, "cells changed2");
}

#[test]
fn small_defects_of_the_first_milestone_stay_fixed() {
    let dir = TestDir::new("history_small");
    setup_store(&dir);
    dir.write("in.csv", "id,v\nA,1\nB,2\n");
    dir.cmd(["ingest", "in.csv", "--table", "s", "--key", "id"])
        .ok();
    dir.cmd(["set", "s", "A", "v", "10", "--why", "typo"]).ok();
    dir.cmd(["commit", "-m", "fix"]).ok();
    // `why TABLE COLUMN` is the column's history, as its help says.
    dir.cmd(["why", "s", "v"]).ok().says(&[
        "s column v since its extract",
        "set A v to '10'",
        "1 cell changed",
    ]);
    // `show --rows` takes keys as the fixes do; an ordering test needs a number or a date.
    let shown = dir
        .cmd(["show", "s", "--rows", "B,A", "--json"])
        .ok()
        .json();
    assert_eq!(shown["rows"].as_array().unwrap().len(), 2, "{shown:#}");
    dir.cmd(["show", "s", "--where", "v above x"])
        .fails(&["compares numbers or dates"]);
    // `diff TABLE REV` compares REV with latest; the table is not read as a revision.
    dir.cmd(["diff", "s", "raw"]).ok().says(&[
        "s from raw (commit 1) to commit 2: 1 cell edited",
        "'1' → '10'",
    ]);
    // A codebook describes a CSV file, so that file is written beside it.
    dir.cmd(["export", "s", "--codebook", "cb.json"]).ok();
    let cb: serde_json::Value = serde_json::from_slice(&dir.read("cb.json")).unwrap();
    assert_eq!(cb["url"], "s.csv");
    assert_eq!(dir.read("s.csv"), b"id,v\nA,10\nB,2\n");
    dir.cmd(["export", "s", "--codebook", "cb.json"])
        .fails(&["describes s.csv, which exists; give -o FILE"]);
}

#[test]
fn each_person_commits_the_fixes_they_recorded() {
    let dir = TestDir::new("history_authors");
    setup_store(&dir);
    dir.cmd_as(".ana", ["id", "new", "--name", "Ana"]).ok();
    dir.write("s.csv", "id,v\nA,1\nB,2\n");
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok();
    dir.cmd(["set", "s", "A", "v", "10", "--why", "mine"]).ok();
    dir.cmd_as(".ana", ["set", "s", "B", "v", "20", "--why", "Ana's"])
        .ok();
    dir.cmd(["status"])
        .ok()
        .says(&["recorded by Test Steward (you)", "recorded by Ana"]);
    let s = dir.cmd(["status", "--json"]).ok().json();
    assert_eq!(s["pending"][1]["recorded_by"]["name"], "Ana");
    // Nobody drops or signs another person's fixes: each commits their own.
    dir.cmd(["discard", "2"])
        .fails(&["pending fix 2 was recorded by Ana; they discard it themselves"]);
    dir.cmd(["commit", "-m", "mine"]).ok().says(&[
        "1 fix, 1 cell changed",
        "left pending: 1 fix another person recorded",
    ]);
    dir.cmd(["commit", "-m", "again"])
        .fails(&["1 fix is pending, none recorded by you"]);
    dir.cmd_as(".ana", ["commit", "-m", "Ana's"]).ok();
    let log = dir.cmd(["log", "--json"]).ok().json();
    let by: Vec<(&str, usize)> = log["commits"].as_array().unwrap()[1..]
        .iter()
        .map(|c| {
            (
                c["author"]["name"].as_str().unwrap(),
                c["fixes"].as_array().unwrap().len(),
            )
        })
        .collect();
    assert_eq!(by, [("Test Steward", 1), ("Ana", 1)]);
    dir.cmd(["set", "s", "A", "v", "11", "--why", "again"]).ok();
    dir.cmd_as(".ana", ["set", "s", "B", "v", "21", "--why", "again"])
        .ok();
    dir.cmd(["discard"])
        .ok()
        .says(&["dropped 1 pending fix; left 1 fix another person recorded"]);
}
