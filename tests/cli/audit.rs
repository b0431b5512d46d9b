//! Issue 3: diff, why, tags and revisions, checked against an expectation the test computes
//! itself (a plain model of the table and of every fix), never by calling emend's own code.

use crate::util::{TestDir, setup_store};
use serde_json::Value;
use std::collections::BTreeMap;

const COLS: [&str; 4] = ["site_id", "site", "ph", "note"];

/// What the test believes about one cell: its value and the fixes (commit, reason) that set it.
#[derive(Clone, Debug, Default)]
struct Cell {
    value: Option<String>,
    events: Vec<(u64, String, Option<String>, Option<String>)>,
}

/// The test's own model of a keyed table: row id -> column -> cell, plus marks.
#[derive(Clone, Debug, Default)]
struct Model {
    rows: BTreeMap<String, BTreeMap<String, Cell>>,
    excluded: BTreeMap<String, u64>,
    distrusted: BTreeMap<String, u64>,
}

impl Model {
    fn set(&mut self, seq: u64, why: &str, row: &str, col: &str, value: Option<&str>) {
        let cell = self.rows.get_mut(row).unwrap().get_mut(col).unwrap();
        let new = value.map(str::to_string);
        if cell.value != new {
            cell.events
                .push((seq, why.to_string(), cell.value.clone(), new.clone()));
            cell.value = new;
        }
    }
}

/// A tiny deterministic generator so the history is varied but reproducible.
struct Lcg(u64);
impl Lcg {
    fn next(&mut self, n: u64) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 33) % n
    }
}

fn build_history() -> (TestDir, Vec<Model>) {
    let dir = TestDir::new("audit_history");
    setup_store(&dir);
    let sites = [
        "Mill Creek",
        "mill creek",
        "Alder Brook",
        "Heron Pool",
        "heron pool",
    ];
    let mut csv = String::from("site_id,site,ph,note\n");
    let mut model = Model::default();
    for i in 1..=40 {
        let id = format!("R{i:03}");
        let site = sites[i % sites.len()];
        let ph = if i % 9 == 0 {
            "-99".to_string()
        } else {
            format!("{}.{}", 6 + i % 3, i % 10)
        };
        let note = if i % 4 == 0 { "" } else { "ok" };
        csv.push_str(&format!("{id},{site},{ph},{note}\n"));
        let mut row = BTreeMap::new();
        for (c, v) in COLS.iter().zip([id.as_str(), site, ph.as_str(), note]) {
            row.insert(
                c.to_string(),
                Cell {
                    value: Some(v.to_string()),
                    events: vec![],
                },
            );
        }
        model.rows.insert(id, row);
    }
    dir.write("sites.csv", &csv);
    dir.cmd([
        "ingest",
        "sites.csv",
        "--table",
        "sites",
        "--key",
        "site_id",
    ])
    .ok();
    let mut models = vec![model.clone()]; // models[k] = state after commit k+1
    let mut rng = Lcg(7);
    for round in 0..22 {
        let n_fixes = 1 + rng.next(3);
        for f in 0..n_fixes {
            let why = format!("round {round} fix {f}");
            let row = format!("R{:03}", 1 + rng.next(40));
            let kind = (round + f) % 5;
            // Commit 1 is the ingest; round r becomes commit r + 2.
            let next_seq = round + 2;
            match kind {
                0 | 1 => {
                    let col = ["site", "ph", "note"][rng.next(3) as usize];
                    if rng.next(4) == 0 {
                        dir.cmd(["set", "sites", &row, col, "--missing", "--why", &why])
                            .ok();
                        model.set(next_seq, &why, &row, col, None);
                    } else {
                        let value = format!("v{round}-{f}");
                        dir.cmd(["set", "sites", &row, col, &value, "--why", &why])
                            .ok();
                        model.set(next_seq, &why, &row, col, Some(&value));
                    }
                }
                2 => {
                    let (from, to) = [
                        ("mill creek", "Mill Creek"),
                        ("heron pool", "Heron Pool"),
                        ("ok", "fine"),
                        ("fine", "ok"),
                    ][rng.next(4) as usize];
                    dir.cmd([
                        "recode",
                        "sites",
                        "site",
                        "--from",
                        from,
                        "--to",
                        to,
                        "--why",
                        &why,
                        "--allow-empty",
                    ])
                    .ok();
                    dir.cmd([
                        "recode",
                        "sites",
                        "note",
                        "--from",
                        from,
                        "--to",
                        to,
                        "--why",
                        &why,
                        "--allow-empty",
                    ])
                    .ok();
                    for r in model.rows.keys().cloned().collect::<Vec<_>>() {
                        for col in ["site", "note"] {
                            if model.rows[&r][col].value.as_deref() == Some(from) {
                                model.set(next_seq, &why, &r, col, Some(to));
                            }
                        }
                    }
                }
                3 => {
                    dir.cmd([
                        "missing",
                        "sites",
                        "ph",
                        "--code",
                        "-99",
                        "--why",
                        &why,
                        "--allow-empty",
                    ])
                    .ok();
                    for r in model.rows.keys().cloned().collect::<Vec<_>>() {
                        if model.rows[&r]["ph"].value.as_deref() == Some("-99") {
                            model.set(next_seq, &why, &r, "ph", None);
                        }
                    }
                    // Put a code back now and then so later missing fixes have work to do.
                    dir.cmd(["set", "sites", &row, "ph", "-99", "--why", &why])
                        .ok();
                    model.set(next_seq, &why, &row, "ph", Some("-99"));
                }
                _ => {
                    if rng.next(2) == 0 {
                        dir.cmd(["exclude", "sites", &row, "--why", &why]).ok();
                        model.excluded.entry(row.clone()).or_insert(next_seq);
                    } else {
                        dir.cmd(["distrust", "sites", "note", "--why", &why]).ok();
                        model.distrusted.entry("note".into()).or_insert(next_seq);
                    }
                }
            }
        }
        dir.cmd(["commit", "-m", &format!("round {round}")]).ok();
        models.push(model.clone());
    }
    assert_eq!(models.len(), 23, "ingest plus 22 fix commits");
    (dir, models)
}

/// The cells that differ between two model states: (row, column) -> (old, new).
fn expected_cells(
    a: &Model,
    b: &Model,
) -> BTreeMap<(String, String), (Option<String>, Option<String>)> {
    let mut out = BTreeMap::new();
    for (row, cols) in &b.rows {
        for (col, cell) in cols {
            let old = &a.rows[row][col].value;
            if *old != cell.value {
                out.insert(
                    (row.clone(), col.clone()),
                    (old.clone(), cell.value.clone()),
                );
            }
        }
    }
    out
}

fn got_cells(diff: &Value) -> BTreeMap<(String, String), (Option<String>, Option<String>)> {
    let table = &diff["tables"][0];
    table["cells"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            let s = |v: &Value| v.as_str().map(str::to_string);
            (
                (s(&c["row"]).unwrap(), s(&c["column"]).unwrap()),
                (s(&c["old"]), s(&c["new"])),
            )
        })
        .collect()
}

#[test]
fn diff_and_why_follow_a_twenty_commit_history() {
    let (dir, models) = build_history();
    dir.cmd(["verify"]).ok();
    // Every pair of a few revisions, both directions, against the model.
    let points = [1u64, 2, 5, 9, 12, 17, 23];
    for &a in &points {
        for &b in &points {
            let d = dir
                .cmd(["diff", "sites", &a.to_string(), &b.to_string(), "--json"])
                .ok()
                .json();
            let expected = expected_cells(&models[a as usize - 1], &models[b as usize - 1]);
            assert_eq!(got_cells(&d), expected, "diff {a} -> {b}");
            let ex_expected: Vec<&String> = models[b as usize - 1]
                .excluded
                .iter()
                .filter(|(r, _)| !models[a as usize - 1].excluded.contains_key(*r))
                .map(|(r, _)| r)
                .collect();
            if a <= b {
                let mut got: Vec<String> = d["tables"][0]["rows_excluded"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|m| m["row"].as_str().unwrap().to_string())
                    .collect();
                got.sort();
                assert_eq!(
                    got.iter().collect::<Vec<_>>(),
                    ex_expected,
                    "exclusions {a} -> {b}"
                );
            }
        }
    }
    // raw -> latest equals commit 1 -> 23.
    let d = dir
        .cmd(["diff", "sites", "raw", "latest", "--json"])
        .ok()
        .json();
    assert_eq!(got_cells(&d), expected_cells(&models[0], &models[22]));
    // Each changed cell names the fix that set its final value.
    let last = &models[22];
    for c in d["tables"][0]["cells"].as_array().unwrap() {
        let cell = &last.rows[c["row"].as_str().unwrap()][c["column"].as_str().unwrap()];
        let (seq, why, _, _) = cell.events.last().unwrap();
        assert_eq!(c["fix"]["seq"].as_u64(), Some(*seq));
        assert_eq!(c["fix"]["why"].as_str(), Some(why.as_str()));
    }

    // why: for every cell with history (and a few without), at several revisions.
    for at in [5u64, 12, 23] {
        let model = &models[at as usize - 1];
        for (row, cols) in &model.rows {
            for (col, cell) in cols {
                if col == "site_id" || (cell.events.is_empty() && !row.ends_with('7')) {
                    continue;
                }
                let w = dir
                    .cmd(["why", "sites", row, col, "--at", &at.to_string(), "--json"])
                    .ok()
                    .json();
                let raw = models[0].rows[row][col].value.clone();
                assert_eq!(
                    w["raw"].as_str().map(str::to_string),
                    raw,
                    "raw of {row}/{col}"
                );
                assert_eq!(
                    w["value"].as_str().map(str::to_string),
                    cell.value,
                    "value of {row}/{col} at {at}"
                );
                let got: Vec<(u64, String, Option<String>, Option<String>)> = w["fixes"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|e| {
                        (
                            e["seq"].as_u64().unwrap(),
                            e["why"].as_str().unwrap().to_string(),
                            e["old"].as_str().map(str::to_string),
                            e["new"].as_str().map(str::to_string),
                        )
                    })
                    .collect();
                assert_eq!(got, cell.events, "history of {row}/{col} at {at}");
                for e in w["fixes"].as_array().unwrap() {
                    assert_eq!(e["signature_valid"], Value::Bool(true));
                    assert_eq!(e["signer_trusted"], Value::Bool(true));
                    assert_eq!(e["author"]["name"], "Test Steward");
                }
            }
        }
    }
}

#[test]
fn tags_name_revisions_and_never_move() {
    let dir = TestDir::new("audit_tags");
    setup_store(&dir);
    dir.write("s.csv", "id,v\nA,1\nB,2\n");
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok();
    dir.cmd(["set", "s", "A", "v", "10", "--why", "typo"]).ok();
    dir.cmd(["commit", "-m", "fix A"]).ok();
    dir.cmd(["tag", "2", "approved-q3", "--note", "sent to the board"])
        .ok();
    dir.cmd(["set", "s", "A", "v", "11", "--why", "second look"])
        .ok();
    dir.cmd(["commit", "-m", "fix A again"]).ok();
    let w = dir
        .cmd(["why", "s", "A", "v", "--at", "approved-q3", "--json"])
        .ok()
        .json();
    assert_eq!(w["value"], "10");
    let w = dir.cmd(["why", "s", "A", "v", "--json"]).ok().json();
    assert_eq!(w["value"], "11");
    dir.cmd(["tag", "latest", "approved-q3"])
        .code(2)
        .fails(&["already names commit 2"]);
    dir.cmd(["tag", "latest"]).code(2).fails(&["not allowed"]);
    dir.cmd(["tag", "deadbeef01"])
        .code(2)
        .fails(&["not allowed"]);
    let tags = dir.cmd(["tags", "--json"]).ok().json();
    assert_eq!(tags["tags"][0]["name"], "approved-q3");
    assert_eq!(tags["tags"][0]["target_seq"], 2);
    let log = dir.cmd(["log", "--json"]).ok().json();
    let kinds: Vec<&str> = log["commits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["kind"].as_str().unwrap())
        .collect();
    assert_eq!(kinds, ["ingest", "fixes", "tag", "fixes"]);
    dir.cmd(["log"]).ok().says(&["tagged approved-q3"]);
    // A hash prefix names a commit; too short or unknown prefixes are errors.
    let id = log["commits"][1]["id"].as_str().unwrap().to_string();
    let d = dir
        .cmd(["diff", "s", &id[..10], "latest", "--json"])
        .ok()
        .json();
    assert_eq!(d["tables"][0]["cells"][0]["new"], "11");
    dir.cmd(["diff", "s", "ffffffffff", "latest"])
        .code(2)
        .fails(&["no commit matches"]);
    dir.cmd(["verify"]).ok();
}

#[test]
fn keyless_extract_with_rows_inserted_and_deleted_in_the_middle_aligns() {
    let dir = TestDir::new("audit_keyless");
    setup_store(&dir);
    let rows: Vec<String> = (1..=30).map(|i| format!("site{i},{}", i * 10)).collect();
    dir.write("a.csv", &format!("site,reading\n{}\n", rows.join("\n")));
    let mut next = rows.clone();
    next.insert(10, "new-one,1".into()); // inserted before old row 11
    next.insert(11, "new-two,2".into());
    next.remove(21); // old row 20 (after the two inserts it sits at index 21)
    let changed = next.iter().position(|r| r == "site25,250").unwrap();
    next[changed] = "site25,251".into();
    dir.write("b.csv", &format!("site,reading\n{}\n", next.join("\n")));
    dir.cmd(["ingest", "a.csv", "--table", "t"]).ok();
    dir.cmd(["ingest", "b.csv", "--table", "t"]).ok();
    let d = dir.cmd(["diff", "t", "1", "2", "--json"]).ok().json();
    let t = &d["tables"][0];
    assert_eq!(t["across_extracts"], true);
    let added: Vec<&str> = t["rows_added"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["cells"][0].as_str().unwrap())
        .collect();
    assert_eq!(added, ["new-one", "new-two"]);
    let removed: Vec<&str> = t["rows_removed"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["cells"][0].as_str().unwrap())
        .collect();
    assert_eq!(removed, ["site20"]);
    let cells = t["cells"].as_array().unwrap();
    assert_eq!(
        cells.len(),
        1,
        "only one real cell change, no cascade: {cells:?}"
    );
    assert_eq!(cells[0]["old"], "250");
    assert_eq!(cells[0]["new"], "251");
    assert_eq!(cells[0]["old_row"], "25");
    assert_eq!(cells[0]["row"], "26");
}

#[test]
fn keyed_extracts_diff_by_key_and_columns() {
    let dir = TestDir::new("audit_keyed");
    setup_store(&dir);
    dir.write("a.csv", "id,v,w\nA,1,x\nB,2,y\nC,3,z\n");
    dir.write("b.csv", "id,v,u\nC,3,new\nA,9,new\nD,4,new\n");
    dir.cmd(["ingest", "a.csv", "--table", "t", "--key", "id"])
        .ok();
    dir.cmd(["set", "t", "C", "v", "30", "--why", "fix C"]).ok();
    dir.cmd(["commit", "-m", "fix"]).ok();
    dir.cmd(["ingest", "b.csv", "--table", "t"]).ok();
    let d = dir.cmd(["diff", "t", "2", "3", "--json"]).ok().json();
    let t = &d["tables"][0];
    assert_eq!(t["columns_added"], serde_json::json!(["u"]));
    assert_eq!(t["columns_removed"], serde_json::json!(["w"]));
    let rows = |k: &str| -> Vec<String> {
        t[k].as_array()
            .unwrap()
            .iter()
            .map(|r| r["row"].as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(rows("rows_added"), ["D"]);
    assert_eq!(rows("rows_removed"), ["B"]);
    let cells: Vec<(String, String, String)> = t["cells"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            (
                c["row"].as_str().unwrap().into(),
                c["old"].as_str().unwrap().into(),
                c["new"].as_str().unwrap().into(),
            )
        })
        .collect();
    // A changed at source; C's fix (30) is not carried to the new extract, so 30 -> 3.
    assert_eq!(
        cells,
        [
            ("A".into(), "1".into(), "9".into()),
            ("C".into(), "30".into(), "3".into())
        ]
    );
    // CSV output for a spreadsheet: a header and one line per change.
    let csv = dir.cmd(["diff", "t", "2", "3", "--csv"]).ok().stdout();
    let lines: Vec<&str> = csv.lines().collect();
    assert_eq!(
        lines[0],
        "table,change,row,old_row,column,old,new,commit,commit_id,fix,why"
    );
    assert!(lines.contains(&"t,row added,D,,,,,,,,"), "{csv}");
    assert!(lines.contains(&"t,column removed,,,w,,,,,,"), "{csv}");
}

/// Same edits on a small and a large table: a diff between the two fix commits reads the same
/// number of index rows (its cost does not grow with the table).
#[test]
fn fix_commit_diff_reads_the_same_index_rows_whatever_the_table_size() {
    let mut reads = Vec::new();
    for n_rows in [10_000u64, 1_000_000] {
        let dir = TestDir::new("audit_flat");
        setup_store(&dir);
        let mut csv = String::with_capacity(n_rows as usize * 12);
        csv.push_str("id,v\n");
        for i in 1..=n_rows {
            csv.push_str(&format!("K{i},{i}\n"));
        }
        dir.write("big.csv", &csv);
        dir.cmd(["ingest", "big.csv", "--table", "big", "--key", "id"])
            .ok();
        for round in 0..2 {
            let pairs: String = (1..=500u64)
                .map(|k| format!("{},{}-{round}\n", k * 7 + round, k))
                .collect();
            dir.write("map.csv", &pairs);
            dir.cmd(["recode", "big", "v", "--map", "map.csv", "--why", "batch"])
                .ok();
            dir.cmd(["commit", "-m", &format!("round {round}")]).ok();
        }
        let d = dir.cmd(["diff", "big", "2", "3", "--json"]).ok().json();
        assert_eq!(d["tables"][0]["cells"].as_array().unwrap().len(), 500);
        reads.push(d["tables"][0]["index_rows_read"].as_u64().unwrap());
    }
    assert_eq!(reads[0], reads[1], "index rows read at 10k and 1M rows");
    assert_eq!(reads[0], 500);
}
