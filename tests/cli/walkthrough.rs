//! The main scenario end to end: ingest with a key, record each kind of fix (with evidence and
//! the expert consulted), look at status, commit, read the log, export, export the raw bytes,
//! verify. Data: a small invented river-monitoring extract (fictional sites and volunteers).

use crate::util::{TestDir, parse_csv, rows, setup_store};

pub const RIVER_CSV: &str = "\
sample_id,site,sampled_on,ph,water_temp_c,turbidity_ntu,volunteer,calibrated
RW-001,Alder Brook,2026-09-01,7.2,14.1,3.2,vol-07,no
RW-002,alder brook,2026-09-01,71,14.3,-999,vol-07,no
RW-003,Fennel Run,2026-09-02,6.8,13.0,5.5,vol-12,no
RW-004,Fennel Run,2026-09-02,6.8,13.0,5.5,vol-12,no
RW-005,Quillet Marsh,2026-09-03,7.5,15.2,-999,vol-03,no
RW-006,ALDER BROOK,2026-09-04,7.0,,2.9,vol-07,no
RW-007,Fennel Rn,2026-09-05,6.9,12.8,4.1,vol-12,no
";

pub const LAB_SHEET: &str = "Riverside volunteer lab sheet (fictional)\n\
sample RW-002, Alder Brook: pH meter reading 7.1\n";

#[test]
fn main_scenario_walkthrough() {
    let dir = TestDir::new("walkthrough");
    setup_store(&dir);
    dir.write("river.csv", RIVER_CSV);
    dir.write("lab_sheet_RW-002.txt", LAB_SHEET);
    dir.write(
        "sites.csv",
        "from,to\nalder brook,Alder Brook\nALDER BROOK,Alder Brook\n",
    );

    dir.cmd([
        "ingest",
        "river.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
        "-m",
        "September extract",
    ])
    .ok()
    .says(&[
        "ingested river.csv as commit 1",
        "7 rows × 8 columns",
        "key sample_id",
    ]);

    // Record one fix of every kind.
    dir.cmd([
        "recode",
        "samples",
        "site",
        "--map",
        "sites.csv",
        "--why",
        "case variants of a registered site name",
    ])
    .ok()
    .says(&["recorded", "pending"]);
    dir.cmd([
        "recode",
        "samples",
        "site",
        "--from",
        "Fennel Rn",
        "--to",
        "Fennel Run",
        "--why",
        "misspelt site",
    ])
    .ok();
    dir.cmd([
        "missing",
        "samples",
        "turbidity_ntu",
        "--why",
        "the app writes -999 when no meter was taken",
        "--code",
        "-999",
    ])
    .ok();
    dir.cmd([
        "set",
        "samples",
        "RW-002",
        "ph",
        "7.1",
        "--why",
        "lab sheet says 7.1",
        "--evidence",
        "lab_sheet_RW-002.txt",
        "--consulted",
        "lab lead",
    ])
    .ok();
    dir.cmd([
        "exclude",
        "samples",
        "RW-004",
        "--why",
        "duplicate of RW-003",
    ])
    .ok();
    dir.cmd([
        "distrust",
        "samples",
        "calibrated",
        "--why",
        "always 'no': the app default",
    ])
    .ok();

    // Status lists the pending fixes with their reasons; nothing is committed yet.
    let status = dir.cmd(["status"]).ok().stdout();
    assert!(status.contains("latest commit 1"), "{status}");
    assert!(status.contains("6 pending fixes"), "{status}");
    for needle in [
        "why: lab sheet says 7.1",
        "consulted: lab lead",
        "evidence: lab_sheet_RW-002.txt",
        "exclude row RW-004",
        "distrust column calibrated",
    ] {
        assert!(
            status.contains(needle),
            "status lacks {needle:?}:\n{status}"
        );
    }
    let status = dir.cmd(["status", "--json"]).ok().json();
    assert_eq!(status["head"]["seq"], 1);
    assert_eq!(status["pending"].as_array().unwrap().len(), 6);
    // Pending fixes do not change the latest version yet.
    assert_eq!(dir.cmd(["export", "samples"]).ok().stdout(), RIVER_CSV);

    dir.cmd(["commit", "-m", "First cleaning pass"])
        .ok()
        .says(&["signed commit 2", "6 fixes", "6 cells changed"]);
    let status = dir.cmd(["status"]).ok().stdout();
    assert!(
        status.contains("latest commit 2") && status.contains("no pending fixes"),
        "{status}"
    );

    // Log: human and JSON.
    let log = dir.cmd(["log"]).ok().stdout();
    for needle in [
        "No. 1  2026-10-01 09:00:00  September extract",
        "No. 2  2026-10-01 09:00:00  First cleaning pass",
        "signed by Test Steward <t@example.org>",
        "set RW-002 ph to '7.1' — lab sheet says 7.1 (1 cell)",
    ] {
        assert!(log.contains(needle), "log lacks {needle:?}:\n{log}");
    }
    assert!(!log.contains("untrusted"), "{log}");
    let log = dir.cmd(["log", "--json"]).ok().json();
    let commits = log["commits"].as_array().unwrap();
    assert_eq!(commits.len(), 2);
    assert_eq!(commits[0]["kind"], "ingest");
    assert_eq!(commits[0]["extract"]["rows"], 7);
    // The extract id is the BLAKE3 hash of the file's bytes (blake3 crate, the reference
    // implementation's Rust port).
    assert_eq!(
        commits[0]["extract"]["blake3"],
        blake3::hash(RIVER_CSV.as_bytes()).to_hex().as_str()
    );
    assert_eq!(commits[1]["parent"], commits[0]["id"]);
    assert_eq!(commits[1]["author"]["trusted"], true);
    let fixes = commits[1]["fixes"].as_array().unwrap();
    let kinds: Vec<&str> = fixes.iter().map(|f| f["kind"].as_str().unwrap()).collect();
    assert_eq!(
        kinds,
        ["recode", "recode", "missing", "set", "exclude", "distrust"]
    );
    let cells: Vec<u64> = fixes
        .iter()
        .map(|f| f["cells_changed"].as_u64().unwrap())
        .collect();
    assert_eq!(cells, [2, 1, 2, 1, 0, 0]);
    let set = &fixes[3];
    assert_eq!(set["why"], "lab sheet says 7.1");
    assert_eq!(set["consulted"], "lab lead");
    assert_eq!(set["evidence"][0]["name"], "lab_sheet_RW-002.txt");
    assert_eq!(set["evidence"][0]["bytes"], LAB_SHEET.len());
    assert_eq!(
        set["evidence"][0]["blake3"],
        blake3::hash(LAB_SHEET.as_bytes()).to_hex().as_str()
    );

    // The cleaned export: fixes applied, excluded row and distrusted column left out,
    // missing values empty.
    let expected = "\
sample_id,site,sampled_on,ph,water_temp_c,turbidity_ntu,volunteer
RW-001,Alder Brook,2026-09-01,7.2,14.1,3.2,vol-07
RW-002,Alder Brook,2026-09-01,7.1,14.3,,vol-07
RW-003,Fennel Run,2026-09-02,6.8,13.0,5.5,vol-12
RW-005,Quillet Marsh,2026-09-03,7.5,15.2,,vol-03
RW-006,Alder Brook,2026-09-04,7.0,,2.9,vol-07
RW-007,Fennel Run,2026-09-05,6.9,12.8,4.1,vol-12
";
    assert_eq!(dir.cmd(["export", "samples"]).ok().stdout(), expected);
    dir.cmd(["export", "samples", "-o", "clean.csv"]).ok();
    assert_eq!(dir.read("clean.csv"), expected.as_bytes());
    let na = dir
        .cmd([
            "export",
            "samples",
            "--na",
            "NA",
            "--with-excluded",
            "--with-distrusted",
        ])
        .ok()
        .stdout();
    let parsed = parse_csv(&na, ',');
    assert_eq!(parsed.len(), 8);
    assert_eq!(parsed[0].len(), 8);
    assert_eq!(
        parsed[2],
        rows(&[&[
            "RW-002",
            "Alder Brook",
            "2026-09-01",
            "7.1",
            "14.3",
            "NA",
            "vol-07",
            "no"
        ]])[0]
    );
    assert_eq!(parsed[4][0], "RW-004");
    assert_eq!(
        parsed[6][4], "NA",
        "a blank raw cell is written as --na too"
    );

    // The raw extract comes back byte for byte, at any revision.
    for at in ["latest", "1", "2", "raw"] {
        let raw = dir.cmd(["export", "samples", "--raw", "--at", at]).ok();
        assert_eq!(raw.stdout_bytes(), RIVER_CSV.as_bytes(), "--at {at}");
    }
    assert_eq!(
        dir.cmd(["export", "samples", "--at", "1"]).ok().stdout(),
        RIVER_CSV
    );

    // show: the fixed cell, the excluded row, the distrusted column, the raw view.
    let show = dir.cmd(["show", "samples", "--json"]).ok().json();
    assert_eq!(show["revision"]["seq"], 2);
    assert_eq!(show["rows"][1]["cells"][3], "7.1");
    assert_eq!(show["rows"][1]["cells"][5], serde_json::Value::Null);
    assert_eq!(show["rows"][3]["excluded"], true);
    assert_eq!(show["distrusted"][7], true);
    let raw = dir
        .cmd(["show", "samples", "--at", "raw", "--json"])
        .ok()
        .json();
    assert_eq!(raw["rows"][1]["cells"][3], "71");
    assert_eq!(raw["rows"][3]["excluded"], false);
    let text = dir
        .cmd(["show", "samples", "--rows", "2-4", "--cols", "sample_id,ph"])
        .ok()
        .stdout();
    assert!(text.contains("rows 2-4 of 7"), "{text}");
    assert!(text.contains("RW-002") && text.contains("7.1"), "{text}");
    assert!(text.contains("4 excluded"), "{text}");
    assert!(!text.contains("RW-005"), "{text}");

    // tables.
    let tables = dir.cmd(["tables", "--json"]).ok().json();
    let t = &tables["tables"][0];
    assert_eq!(t["table"], "samples");
    assert_eq!(t["rows"], 7);
    assert_eq!(t["edited_cells"], 6);
    assert_eq!(t["excluded_rows"], 1);
    assert_eq!(t["distrusted_columns"], serde_json::json!(["calibrated"]));

    // verify.
    dir.cmd(["verify"])
        .ok()
        .says(&["intact:", "2 commits", "2 table versions"]);
    let v = dir.cmd(["verify", "--json"]).ok().json();
    assert_eq!(v["intact"], true);
    assert_eq!(v["problems"], serde_json::json!([]));
    assert_eq!(v["checked"]["commits"], 2);
    assert_eq!(
        v["checked"]["files"], 2,
        "the extract and the evidence file"
    );
}

#[test]
fn keyless_and_composite_key_tables_name_rows() {
    let dir = TestDir::new("row_names");
    setup_store(&dir);
    dir.write(
        "visits.csv",
        "site,visit,flow\nA1,2026-01-01,1.5\nA1,2026-01-02,2.5\nB2,2026-01-01,3.5\n",
    );
    dir.write("gauge.csv", "stage,flow\n0.4,1\n0.5,2\n0.6,3\n");
    dir.cmd([
        "ingest",
        "visits.csv",
        "--table",
        "visits",
        "--key",
        "site,visit",
    ])
    .ok();
    dir.cmd(["ingest", "gauge.csv", "--table", "gauge"])
        .ok()
        .says(&["rows named by position"]);
    dir.cmd([
        "set",
        "visits",
        "A1,2026-01-02",
        "flow",
        "25",
        "--why",
        "logger says 25",
    ])
    .ok();
    dir.cmd([
        "set",
        "gauge",
        "2",
        "flow",
        "--missing",
        "--why",
        "sensor fouled",
    ])
    .ok();
    dir.cmd(["exclude", "gauge", "3", "--why", "test reading"])
        .ok();
    dir.cmd(["set", "gauge", "4", "flow", "9", "--why", "no such row"])
        .fails(&["no row '4'"]);
    dir.cmd(["commit", "-m", "two tables"]).ok();
    assert_eq!(
        dir.cmd(["export", "visits"]).ok().stdout(),
        "site,visit,flow\nA1,2026-01-01,1.5\nA1,2026-01-02,25\nB2,2026-01-01,3.5\n"
    );
    assert_eq!(
        dir.cmd(["export", "gauge", "--na", "NA"]).ok().stdout(),
        "stage,flow\n0.4,1\n0.5,NA\n"
    );
    // The id of commit 3 by an 8-digit prefix.
    let log = dir.cmd(["log", "--json"]).ok().json();
    let id = log["commits"][2]["id"].as_str().unwrap()[..8].to_string();
    assert_eq!(
        dir.cmd(["export", "gauge", "--at", &id]).ok().stdout(),
        "stage,flow\n0.4,1\n0.5,\n"
    );
    dir.cmd(["export", "gauge", "--at", "9"])
        .fails(&["no commit matches revision '9'"]);
    dir.cmd(["export", "gauge", "--at", "0000000000"])
        .fails(&["revision"]);
    dir.cmd(["log", "nope"]).fails(&["no table named 'nope'"]);
    dir.cmd(["verify"]).ok();
}
