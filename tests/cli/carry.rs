//! Issue 7: carrying decisions to the next extract, with an outcome per fix and per cell.

use crate::util::{TestDir, setup_store};
use serde_json::Value;

fn outcome<'a>(carry: &'a Value, kind: &str, needle: &str) -> &'a Value {
    carry["fixes"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["kind"] == kind && f["description"].as_str().unwrap().contains(needle))
        .unwrap_or_else(|| panic!("no {kind} fix mentioning {needle}: {carry:#}"))
}

#[test]
fn every_outcome_and_a_chain_of_origins() {
    let dir = TestDir::new("carry_outcomes");
    setup_store(&dir);
    dir.write(
        "oct.csv",
        "id,site,ph\nA,mill creek,7\nB,Mill Creek,71\nC,heron,6\nD,mill creek,8\nE,x,5\n",
    );
    // November: B fixed at source, C changed at source (conflict), D withdrawn, F and G new
    // rows with the same misspelling.
    dir.write("nov.csv", "id,site,ph\nA,mill creek,7\nB,Mill Creek,7.1\nC,heron,65\nF,mill creek,6\nE,x,5\nG,mill creek,5\n");
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "id"])
        .ok();
    dir.cmd([
        "recode",
        "s",
        "site",
        "--from",
        "mill creek",
        "--to",
        "Mill Creek",
        "--why",
        "spelling",
    ])
    .ok();
    dir.cmd(["set", "s", "B", "ph", "7.1", "--why", "lab sheet"])
        .ok();
    dir.cmd(["set", "s", "C", "ph", "6.5", "--why", "decimal point"])
        .ok();
    dir.cmd(["set", "s", "D", "ph", "8.1", "--why", "typo"])
        .ok();
    dir.cmd(["exclude", "s", "E", "--why", "duplicate"]).ok();
    dir.cmd(["commit", "-m", "October pass"]).ok();
    dir.cmd(["tag", "approved-q3"]).ok();
    dir.cmd([
        "ingest",
        "nov.csv",
        "--table",
        "s",
        "-m",
        "November extract",
    ])
    .ok();
    let c = dir
        .cmd(["carry", "s", "--from", "approved-q3", "--json"])
        .ok()
        .json();
    let recode = outcome(&c, "recode", "mill creek");
    assert_eq!(recode["outcome"], "applied");
    assert_eq!(recode["matches_now"], 3, "A plus the new rows F and G");
    assert_eq!(recode["new_matches"], 2);
    let cells: Vec<(&str, &str)> = recode["cells"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| (x["row"].as_str().unwrap(), x["outcome"].as_str().unwrap()))
        .collect();
    assert_eq!(cells, [("A", "applied"), ("D", "row gone")]);
    assert_eq!(outcome(&c, "set", "set B")["outcome"], "fixed at source");
    let conflict = outcome(&c, "set", "set C");
    assert_eq!(conflict["outcome"], "conflict");
    assert_eq!(conflict["cells"][0]["now"], "65");
    assert_eq!(conflict["cells"][0]["was"], "6");
    assert_eq!(outcome(&c, "set", "set D")["outcome"], "row gone");
    assert_eq!(outcome(&c, "exclude", "E")["outcome"], "applied");
    // Only applied fixes are staged, with their outcome for status.
    let status = dir.cmd(["status", "--json"]).ok().json();
    let pending = status["pending"].as_array().unwrap();
    assert_eq!(pending.len(), 2);
    assert!(
        pending[0]["note"]
            .as_str()
            .unwrap()
            .contains("carried: applied")
    );
    dir.cmd(["status"]).ok().says(&["carried from commit 2"]);

    // Issue 15: the conflict stays open, a decision owed: status lists it, why shows it,
    // commit refuses until it is answered (or deferred).
    let status = dir.cmd(["status", "--json"]).ok().json();
    assert_eq!(
        status["conflicts"][0]["cells"][0]["now"], "65",
        "{status:#}"
    );
    dir.cmd(["status"]).ok().says(&[
        "1 open conflict",
        "conflict 1. set C",
        "the new extract holds '65'",
    ]);
    dir.cmd(["why", "s", "C", "ph"])
        .ok()
        .says(&["open conflict 1", "emend resolve 1"]);
    dir.cmd(["commit", "-m", "October decisions carried to November"])
        .fails(&[
            "1 carried conflict is open",
            "emend resolve N",
            "--defer-conflicts",
        ]);
    // Answered, the conflict closes; discarding the answer opens it again.
    dir.cmd(["resolve", "2", "--keep-source", "--why", "x"])
        .fails(&["no open conflict 2"]);
    dir.cmd([
        "resolve",
        "1",
        "--keep-source",
        "--why",
        "the lab re-ran it: 65 is right",
    ])
    .ok()
    .says(&["answered conflict 1", "keep ph as it is in rows C"]);
    dir.cmd(["status"]).ok().says(&["3 pending fixes"]);
    dir.cmd(["discard", "3"]).ok();
    // Reopened under a new number: numbers never move under the user's feet.
    dir.cmd(["status"])
        .ok()
        .says(&["1 open conflict", "conflict 2. set C"]);
    dir.cmd(["resolve", "1", "--set", "6.5", "--why", "x"])
        .fails(&["no open conflict 1: the open ones are 2"]);
    dir.cmd([
        "resolve",
        "2",
        "--set",
        "6.5",
        "--why",
        "decimal slipped again",
    ])
    .ok();
    dir.cmd(["commit", "-m", "October decisions carried to November"])
        .ok();
    dir.cmd(["why", "s", "C", "ph"]).ok().says(&[
        "'65' → '6.5'",
        "decimal slipped again",
        "carried from commit 2",
    ]);
    let d = dir
        .cmd(["diff", "s", "raw", "latest", "--json"])
        .ok()
        .json();
    let changed: Vec<&str> = d["tables"][0]["cells"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["row"].as_str().unwrap())
        .collect();
    assert_eq!(changed, ["A", "C", "F", "G"]);
    // Run again after the commit: nothing is queued twice, and it says so.
    dir.cmd(["carry", "s"])
        .ok()
        .says(&["nothing to carry", "commit 5"]);
    let again = dir.cmd(["carry", "s", "--json"]).ok().json();
    let outcomes: Vec<&str> = again["fixes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["outcome"].as_str().unwrap())
        .collect();
    assert_eq!(
        outcomes,
        [
            "already carried",
            "fixed at source",
            "already carried",
            "row gone",
            "already carried"
        ],
        "{again:#}"
    );
    dir.cmd(["status"]).ok().says(&["no pending fixes"]);
    // December: carried again; why shows both origins.
    dir.write(
        "dec.csv",
        "id,site,ph\nA,mill creek,7\nH,mill creek,1\nE,x,5\n",
    );
    dir.cmd(["ingest", "dec.csv", "--table", "s"]).ok();
    dir.cmd(["carry", "s"]).ok().says(&["[applied]"]);
    dir.cmd(["commit", "-m", "carried to December"]).ok();
    let w = dir.cmd(["why", "s", "A", "site", "--json"]).ok().json();
    let origins: Vec<u64> = w["fixes"][0]["carried_from"]
        .as_array()
        .unwrap()
        .iter()
        .map(|o| o["seq"].as_u64().unwrap())
        .collect();
    assert_eq!(origins, [2, 5], "October's commit, then November's");
    assert_eq!(w["fixes"][0]["why"], "spelling");
    assert_eq!(w["value"], "Mill Creek");
    dir.cmd(["why", "s", "A", "site"])
        .ok()
        .says(&["carried from commit 2 via commit 5"]);
    dir.cmd(["verify"]).ok();
}

#[test]
fn keyless_tables_carry_by_row_alignment() {
    let dir = TestDir::new("carry_keyless");
    setup_store(&dir);
    let rows: Vec<String> = (1..=12).map(|i| format!("s{i},{}", i * 10)).collect();
    dir.write("a.csv", &format!("site,reading\n{}\n", rows.join("\n")));
    let mut next = rows.clone();
    next.insert(3, "inserted,0".into());
    dir.write("b.csv", &format!("site,reading\n{}\n", next.join("\n")));
    dir.cmd(["ingest", "a.csv", "--table", "t"]).ok();
    dir.cmd(["set", "t", "8", "reading", "81", "--why", "recount"])
        .ok();
    dir.cmd(["commit", "-m", "fix"]).ok();
    dir.cmd(["ingest", "b.csv", "--table", "t"]).ok();
    let c = dir.cmd(["carry", "t", "--json"]).ok().json();
    let set = outcome(&c, "set", "reading");
    assert_eq!(set["outcome"], "applied");
    assert_eq!(set["row"], "9", "old row 8 is row 9 after the insert");
    dir.cmd(["commit", "-m", "carried"]).ok();
    let out = dir.cmd(["export", "t"]).ok().stdout();
    assert!(out.contains("s8,81\n"), "{out}");
    dir.cmd(["verify"]).ok();
}

#[test]
fn carry_needs_a_second_extract_and_no_pending_fixes() {
    let dir = TestDir::new("carry_refusals");
    setup_store(&dir);
    dir.write("a.csv", "id,v\nA,1\n");
    dir.cmd(["ingest", "a.csv", "--table", "t", "--key", "id"])
        .ok();
    dir.cmd(["carry", "t"]).code(2).fails(&["only one extract"]);
    dir.cmd(["carry", "nope"])
        .code(2)
        .fails(&["no table named 'nope'"]);
}
