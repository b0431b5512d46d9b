//! Workbooks in and out (issue 18), against independent writers and readers: the workbooks are
//! written in each test's setup by `tests/workbooks/make.py` (openpyxl, odfpy, msoffcrypto-tool
//! and xlwt from PyPI, pinned in .ci/run), and the exported workbook is read back by openpyxl.
//! Without those packages the tests are skipped, unless EMEND_REQUIRE_PYXL is set (CI sets it),
//! when they fail.

use crate::util::{TestDir, setup_store, store_state};
use std::process::Command;

const MAKE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/workbooks/make.py");

/// Write the workbooks into `dir/wb/`; `false` (skip) when Python lacks the writers.
fn workbooks(dir: &TestDir) -> bool {
    let out = Command::new("python3")
        .arg(MAKE)
        .arg(dir.path("wb"))
        .output();
    match out {
        Ok(o) if o.status.success() => true,
        other => {
            let why = match other {
                Ok(o) => String::from_utf8_lossy(&o.stderr).into_owned(),
                Err(e) => e.to_string(),
            };
            assert!(
                std::env::var_os("EMEND_REQUIRE_PYXL").is_none(),
                "the workbook writers are required (EMEND_REQUIRE_PYXL is set) but failed: {why}\n\
                 install them: pip install openpyxl==3.1.5 odfpy==1.4.1 msoffcrypto-tool==5.4.2 xlwt==1.3.0"
            );
            eprintln!(
                "skipped: python3 with openpyxl, odfpy, msoffcrypto-tool and xlwt is needed ({why})"
            );
            false
        }
    }
}

/// Run a Python check (openpyxl as the independent reader) in `dir`.
fn python(dir: &TestDir, script: &str) -> String {
    let out = Command::new("python3")
        .arg("-c")
        .arg(script)
        .current_dir(dir.root())
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "python check failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

#[test]
fn a_workbook_is_ingested_profiled_fixed_exported_and_verified_and_its_bytes_come_back() {
    let dir = TestDir::new("workbook_path");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    let out = dir
        .cmd([
            "ingest",
            "wb/samples.xlsx",
            "-t",
            "samples",
            "--key",
            "site_id",
            "--json",
        ])
        .ok()
        .json();
    assert_eq!(out["format"], "xlsx");
    assert_eq!(out["rows"], 4);
    // Every feature the table cannot hold is reported, with its cells (make.py: formulas in
    // G2:G5, a comment on B3, row 5 and column F hidden).
    let kinds: Vec<(String, u64)> = out["notes"]
        .as_array()
        .unwrap()
        .iter()
        .map(|n| {
            (
                n["kind"].as_str().unwrap().to_string(),
                n["count"].as_u64().unwrap(),
            )
        })
        .collect();
    for (kind, n) in [
        ("formulas", 4),
        ("comments", 1),
        ("hidden-rows", 1),
        ("hidden-columns", 1),
    ] {
        assert!(
            kinds.contains(&(kind.to_string(), n)),
            "{kind} in {kinds:?}"
        );
    }
    // Canonical text: dates in ISO 8601, a date-time with its time, numbers shortest, booleans
    // as words, a formula without a cached value (openpyxl writes none) as empty.
    let csv = dir.cmd(["export", "samples"]).ok().stdout();
    assert_eq!(
        csv,
        "site_id,site,visited,ph,flow_ok,count,ratio\n\
         MC01,Mill Creek,2024-10-03,7.1,true,12,\n\
         MC02,Mill Craek,2024-10-04,0.1,false,3,\n\
         OB01,Otter Brook,2024-10-05T14:30:00,71,true,0,\n\
         OB02,Otter Brook,2024-10-06,,true,8,\n"
    );
    let profile = dir.cmd(["profile", "samples", "--json"]).ok().json();
    assert!(profile.to_string().contains("\"ph\""));
    dir.cmd([
        "set",
        "samples",
        "MC02",
        "site",
        "Mill Creek",
        "--why",
        "misspelling",
    ])
    .ok();
    dir.cmd(["commit", "-m", "spelling"]).ok();
    dir.cmd(["verify"]).ok().says(&["intact"]);
    dir.cmd([
        "export",
        "samples",
        "--at",
        "raw",
        "--raw",
        "-o",
        "back.xlsx",
    ])
    .ok();
    assert_eq!(dir.read("back.xlsx"), dir.read("wb/samples.xlsx"));
    assert!(
        dir.cmd(["export", "samples"])
            .ok()
            .stdout()
            .contains("MC02,Mill Creek,")
    );
}

#[test]
fn a_csv_and_a_workbook_with_the_same_cells_have_the_same_version_hash() {
    let dir = TestDir::new("workbook_hash");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    let a = dir
        .cmd(["ingest", "wb/plain.xlsx", "-t", "a", "--json"])
        .ok()
        .json();
    let b = dir
        .cmd(["ingest", "wb/plain.csv", "-t", "b", "--json"])
        .ok()
        .json();
    assert_eq!(a["version"], b["version"]);
    assert_ne!(a["extract"], b["extract"]);
}

#[test]
fn the_review_workbook_is_read_back_by_openpyxl_and_by_ingest() {
    let dir = TestDir::new("workbook_export");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    dir.cmd(["ingest", "wb/samples.xlsx", "-t", "s", "--key", "site_id"])
        .ok();
    dir.cmd([
        "set",
        "s",
        "MC02",
        "site",
        "Mill Creek",
        "--why",
        "misspelling",
    ])
    .ok();
    dir.cmd([
        "keep",
        "s",
        "--rows",
        "OB01",
        "ph",
        "--why",
        "lab confirms 71",
    ])
    .ok();
    dir.cmd([
        "note",
        "s",
        "--rows",
        "OB02",
        "ph",
        "--why",
        "ask the volunteer",
    ])
    .ok();
    dir.cmd(["commit", "-m", "review"]).ok();
    dir.cmd([
        "export",
        "s",
        "--xlsx",
        "review.xlsx",
        "--raw-values",
        "--decisions",
        "d.csv",
    ])
    .ok();
    assert!(
        dir.cmd(["export", "s", "--xlsx", "review2.xlsx"])
            .ok()
            .stderr()
            .contains("3 cells marked, 3 decisions")
    );
    // openpyxl 3.1.5 is the independent reader: values and their types, fills, notes, the
    // decisions sheet equal to the decisions CSV, the raw values sheet.
    let said = python(
        &dir,
        r#"
import csv, datetime, openpyxl
wb = openpyxl.load_workbook("review.xlsx")
assert wb.sheetnames == ["s", "decisions", "raw values"], wb.sheetnames
ws = wb["s"]
assert [c.value for c in ws[1]] == ["site_id", "site", "visited", "ph", "flow_ok", "count", "ratio"]
assert ws["C2"].value == datetime.datetime(2024, 10, 3) and ws["C2"].is_date
assert ws["C4"].value == datetime.datetime(2024, 10, 5, 14, 30)
assert ws["D2"].value == 7.1 and ws["F2"].value == 12 and ws["E3"].value is False
assert ws["B3"].value == "Mill Creek"
assert ws["B3"].fill.fgColor.rgb == "FFBDD7EE"
assert ws["D4"].fill.fgColor.rgb == "FFC6EFCE" and ws["D5"].fill.fgColor.rgb == "FFFFEB9C"
note = ws["B3"].comment.text
for part in ["set: 'Mill Craek' → 'Mill Creek'", "why: misspelling", "by Test Steward", "commit "]:
    assert part in note, note
assert "lab confirms 71" in ws["D4"].comment.text
with open("d.csv", newline="") as f:
    rows = list(csv.reader(f))
got = [[("" if v is None else v) for v in r] for r in wb["decisions"].iter_rows(values_only=True)]
assert got == rows, (got, rows)
raw = list(wb["raw values"].iter_rows(values_only=True))
assert raw == [("row", "column", "raw", "new"), ("MC02", "site", "Mill Craek", "Mill Creek")], raw
print("openpyxl agrees")
"#,
    );
    assert!(said.contains("openpyxl agrees"));
    // And through emend's own reader: the exported workbook is the cleaned version.
    let cleaned = dir.cmd(["export", "s"]).ok().stdout();
    dir.cmd(["ingest", "review.xlsx", "-t", "back", "--key", "site_id"])
        .ok();
    assert_eq!(dir.cmd(["export", "back"]).ok().stdout(), cleaned);
}

#[test]
fn an_ods_file_goes_the_same_way() {
    let dir = TestDir::new("workbook_ods");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    let out = dir
        .cmd(["ingest", "wb/samples.ods", "-t", "o", "--json"])
        .ok()
        .json();
    assert_eq!(out["format"], "ods");
    assert_eq!(
        dir.cmd(["export", "o"]).ok().stdout(),
        "site_id,ph,visited,ok\nMC01,7.1,2024-10-03,true\nMC02,7,2024-10-04,false\n"
    );
    dir.cmd(["set", "o", "2", "ph", "7.0", "--why", "lab sheet"])
        .ok();
    dir.cmd(["commit", "-m", "ph"]).ok();
    dir.cmd(["verify"]).ok();
    dir.cmd(["export", "o", "--at", "raw", "--raw", "-o", "back.ods"])
        .ok();
    assert_eq!(dir.read("back.ods"), dir.read("wb/samples.ods"));
}

#[test]
fn every_sheet_becomes_a_table_in_one_go() {
    let dir = TestDir::new("workbook_sheets");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    dir.cmd(["ingest", "wb/samples.xlsx", "--sheets"])
        .ok()
        .says(&["table Samples", "table Sites", "table Notes_page"]);
    let tables = dir.cmd(["tables", "--json"]).ok().stdout();
    for t in ["Samples", "Sites", "Notes_page"] {
        assert!(tables.contains(t), "{tables}");
    }
    dir.cmd([
        "ingest",
        "wb/samples.xlsx",
        "-t",
        "x",
        "--sheet",
        "Sites",
        "--key",
        "site_id",
    ])
    .ok()
    .says(&["2 rows × 2 columns"]);
}

#[test]
fn a_title_block_or_merged_header_is_refused_with_a_hint_and_header_row_takes_the_table() {
    let dir = TestDir::new("workbook_header");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    let before = store_state(&dir);
    dir.cmd(["ingest", "wb/titled.xlsx", "-t", "t"])
        .code(2)
        .fails(&["looks like a title", "--header-row 3"]);
    dir.cmd(["ingest", "wb/merged.xlsx", "-t", "m"])
        .code(2)
        .fails(&["merged cells (B1:C1)", "--header-row"]);
    assert_eq!(store_state(&dir), before, "nothing stored");
    dir.cmd([
        "ingest",
        "wb/titled.xlsx",
        "-t",
        "t",
        "--header-row",
        "3",
        "--json",
    ])
    .ok();
    assert_eq!(
        dir.cmd(["export", "t"]).ok().stdout(),
        "site_id,ph\nMC01,7.1\nMC02,6.9\n"
    );
    dir.cmd(["ingest", "wb/merged.xlsx", "-t", "m", "--header-row", "2"])
        .ok()
        .says(&["rows above the header"]);
}

#[test]
fn bad_workbooks_are_refused_with_a_clear_error_and_nothing_is_stored() {
    let dir = TestDir::new("workbook_bad");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    let mut cut = dir.read("wb/samples.xlsx");
    cut.truncate(cut.len() / 2);
    dir.write_bytes("cut.xlsx", &cut);
    let before = store_state(&dir);
    let cases: [(&[&str], &[&str]); 6] = [
        (
            &["ingest", "wb/locked.xlsx", "-t", "x"],
            &["password-protected", "without a password"],
        ),
        (
            &["ingest", "cut.xlsx", "-t", "x"],
            &["not a readable .xlsx workbook", "save a copy"],
        ),
        (
            &["ingest", "wb/old.xls", "-t", "x"],
            &["old binary workbook (.xls)", "save a copy as .xlsx"],
        ),
        (
            &["ingest", "wb/empty.xlsx", "-t", "x"],
            &["sheet 'Blank' is empty"],
        ),
        (
            &["ingest", "wb/samples.xlsx", "-t", "x", "--sheet", "Nope"],
            &["no sheet named 'Nope'", "'Samples', 'Sites', 'Notes page'"],
        ),
        (
            &["ingest", "wb/plain.csv", "-t", "x", "--sheet", "Data"],
            &["not a workbook"],
        ),
    ];
    for (args, needles) in cases {
        dir.cmd(args)
            .code(2)
            .fails(needles)
            .fails(&["emend: error:"]);
        assert_eq!(store_state(&dir), before, "{args:?} changed the store");
    }
}

#[test]
fn a_reviewers_answers_come_back_from_a_workbook() {
    let dir = TestDir::new("workbook_decisions");
    if !workbooks(&dir) {
        return;
    }
    setup_store(&dir);
    dir.cmd(["ingest", "wb/samples.xlsx", "-t", "s", "--key", "site_id"])
        .ok();
    dir.cmd([
        "decisions",
        "apply",
        "s",
        "wb/review.xlsx",
        "--why",
        "reviewer's answers",
    ])
    .ok();
    dir.cmd(["commit", "-m", "review"]).ok();
    let csv = dir.cmd(["export", "s"]).ok().stdout();
    assert!(csv.contains("MC02,Mill Creek,"), "{csv}");
    let why = dir.cmd(["why", "s", "MC02", "site"]).ok().stdout();
    assert!(why.contains("Mill Creek"), "{why}");
}

#[test]
fn completions_and_the_manual_come_from_the_argument_definitions() {
    let dir = TestDir::new("completions");
    let bash = dir.cmd(["completions", "bash"]).ok().stdout();
    assert!(bash.contains("complete -F _emend") && bash.contains("--header-row"));
    for shell in ["zsh", "fish", "powershell"] {
        assert!(
            dir.cmd(["completions", shell])
                .ok()
                .stdout()
                .contains("ingest")
        );
    }
    dir.cmd(["completions", "tcsh"])
        .code(2)
        .fails(&["possible values"]);
    let man = dir.cmd(["manual"]).ok().stdout();
    // roff (man(7)): a title line, then sections.
    assert!(
        man.starts_with(".ie") || man.contains(".TH emend 1"),
        "{}",
        &man[..200.min(man.len())]
    );
    assert!(man.contains(".SH \"EMEND INGEST\"") && man.contains("header\\-row"));
}
