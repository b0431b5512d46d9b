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
    // Nobody signs another person's fixes under their own message.
    dir.cmd(["commit", "-m", "both"])
        .fails(&["pending fixes 2 (recorded by Ana) were recorded by someone else"]);
    dir.cmd_as(".ana", ["commit", "-m", "both"])
        .fails(&["1 (recorded by Test Steward)"]);
    dir.cmd_as(".ana", ["discard", "2"]).ok();
    dir.cmd(["commit", "-m", "mine"]).ok();
    let log = dir.cmd(["log", "--json"]).ok().json();
    assert_eq!(log["commits"][1]["fixes"].as_array().unwrap().len(), 1);
}
