//! Issue 14: every decision in one command. Each fix kind that chooses rows or transforms
//! cells goes through commit, `why`, `diff`, `export`, the report, `verify`, and `carry` onto
//! a next extract. Data: a small invented river-monitoring extract (fictional sites and
//! volunteers); expected values are worked by hand from the rows below.

use crate::util::{TestDir, parse_csv, setup_store};

const OCT: &str = "\
sample_id,site,sampled_on,lon,ph,notes
RW-01,Fox Run,13/01/2026,112.5,7.2,algae  
RW-02,Heron  Pool,14/01/2026,-111.9,71,
RW-03,Fox Run,15/01/2026,-112.0,6.8,clear
RW-04,Fox Run,15/01/2026,-112.0,6.8,clear
RW-05,Heron  Pool,16/01/2026,110.7,7.5,hot inflow
";

// November: RW-06 is a new row with the same sign error; RW-02 was fixed at source.
const NOV: &str = "\
sample_id,site,sampled_on,lon,ph,notes
RW-01,Fox Run,13/01/2026,112.5,7.2,algae  
RW-02,Heron  Pool,14/01/2026,-111.9,7.1,
RW-03,Fox Run,15/01/2026,-112.0,6.8,clear
RW-05,Heron  Pool,16/01/2026,110.7,7.5,hot inflow
RW-06,Fox Run,17/01/2026,111.1,7.0,
";

fn column(csv: &str, name: &str) -> Vec<String> {
    let rows = parse_csv(csv, ',');
    let c = rows[0].iter().position(|h| h == name).unwrap();
    rows[1..].iter().map(|r| r[c].clone()).collect()
}

#[test]
fn each_decision_is_recorded_signed_traced_and_carried() {
    let dir = TestDir::new("decisions");
    setup_store(&dir);
    dir.write("oct.csv", OCT);
    dir.write("nov.csv", NOV);
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "sample_id"])
        .ok();

    // A condition on one line, in the rules file's words; the effect is stated before commit.
    dir.cmd([
        "set",
        "s",
        "lon",
        "--negate",
        "--where",
        "lon gt 0",
        "--why",
        "sign flipped by the app",
    ])
    .ok()
    .says(&["changes 2 cells", "RW-01: '112.5' → '-112.5'"]);
    dir.cmd([
        "set",
        "s",
        "ph",
        "--scale",
        "-1",
        "--rows",
        "RW-02",
        "--why",
        "decimal slipped",
    ])
    .ok()
    .says(&["'71' → '7.1'"]);
    dir.cmd(["tidy", "s", "site", "--spaces", "--why", "doubled spaces"])
        .ok()
        .says(&["changes 2 cells"]);
    dir.cmd([
        "replace",
        "s",
        "notes",
        "--pattern",
        r"\s+$",
        "--with",
        "",
        "--why",
        "trailing blanks",
    ])
    .ok();
    dir.cmd([
        "dates",
        "s",
        "sampled_on",
        "--from",
        "day-month-year",
        "--why",
        "the app writes d/m/y",
    ])
    .ok()
    .says(&["changes 5 cells"]);
    dir.cmd([
        "exclude",
        "s",
        "--duplicates",
        "--why",
        "same bottle logged twice",
    ])
    .ok()
    .says(&["chooses 1 row"]);
    dir.cmd([
        "keep",
        "s",
        "notes",
        "--rows",
        "RW-05",
        "--why",
        "checked with the volunteer",
    ])
    .ok();
    dir.cmd([
        "note",
        "s",
        "ph",
        "--rows",
        "#2",
        "--why",
        "lab asked to re-run",
    ])
    .ok();
    // A fix that would change nothing is refused until asked for; one pending fix can go.
    dir.cmd([
        "set",
        "s",
        "ph",
        "--negate",
        "--where",
        "ph gt 100",
        "--why",
        "x",
    ])
    .fails(&["changes no cell", "--allow-empty"]);
    dir.cmd(["tidy", "s", "site", "--case", "upper", "--why", "try"])
        .ok();
    dir.cmd(["discard", "9"])
        .ok()
        .says(&["dropped pending fix 9"]);
    dir.cmd(["discard", "9"]).fails(&["no pending fix 9"]);
    // Bad input names what and where.
    dir.cmd([
        "set",
        "s",
        "lon",
        "--negate",
        "--where",
        "lon over 0",
        "--why",
        "x",
    ])
    .fails(&["at character 5", "equals, not, below"]);
    dir.cmd([
        "set", "s", "lon", "--negate", "--where", "lat gt 0", "--why", "x",
    ])
    .fails(&["no column 'lat'"]);
    dir.cmd([
        "replace",
        "s",
        "notes",
        "--pattern",
        "(",
        "--with",
        "",
        "--why",
        "x",
    ])
    .fails(&["does not compile"]);
    dir.cmd([
        "set", "s", "site", "--negate", "--rows", "RW-01", "--why", "x",
    ])
    .fails(&["row RW-01 site: not a plain decimal number"]);
    dir.cmd(["keep", "s", "notes", "--rows", "RW-99", "--why", "x"])
        .fails(&["RW-99"]);

    dir.cmd(["commit", "-m", "October pass"]).ok();
    dir.cmd(["verify"]).ok().says(&["intact"]);

    let csv = dir.cmd(["export", "s"]).ok().stdout();
    assert_eq!(
        column(&csv, "sample_id"),
        ["RW-01", "RW-02", "RW-03", "RW-05"]
    );
    assert_eq!(
        column(&csv, "lon"),
        ["-112.5", "-111.9", "-112.0", "-110.7"]
    );
    assert_eq!(column(&csv, "ph"), ["7.2", "7.1", "6.8", "7.5"]);
    assert_eq!(
        column(&csv, "site"),
        ["Fox Run", "Heron Pool", "Fox Run", "Heron Pool"]
    );
    assert_eq!(column(&csv, "notes"), ["algae", "", "clear", "hot inflow"]);
    assert_eq!(
        column(&csv, "sampled_on"),
        ["2026-01-13", "2026-01-14", "2026-01-15", "2026-01-16"]
    );

    // why: the transform's cell, the value kept on purpose, the note.
    dir.cmd(["why", "s", "RW-01", "lon"])
        .ok()
        .says(&["'112.5' → '-112.5'", "sign flipped by the app"]);
    dir.cmd(["why", "s", "RW-05", "notes"])
        .ok()
        .says(&["kept on purpose", "checked with the volunteer"]);
    dir.cmd(["why", "s", "RW-02", "ph"]).ok().says(&[
        "7.1",
        "a note for review",
        "lab asked to re-run",
    ]);
    let diff = dir
        .cmd(["diff", "s", "raw", "latest", "--json"])
        .ok()
        .json();
    let text = diff.to_string();
    assert!(
        text.contains("RW-04"),
        "the excluded copy is in the diff: {text}"
    );
    let noted = dir.cmd(["export", "s", "--notes"]).ok().stdout();
    assert_eq!(
        column(&noted, "emend_notes"),
        ["", "ph: lab asked to re-run", "", ""]
    );
    dir.cmd([
        "export",
        "s",
        "-o",
        "clean.csv",
        "--decisions",
        "decisions.csv",
    ])
    .ok();
    let decisions = String::from_utf8(dir.read("decisions.csv")).unwrap();
    let lines: Vec<&str> = decisions.lines().collect();
    assert!(
        lines
            .iter()
            .any(|l| l.starts_with("RW-05,notes,,,keep,checked with the volunteer")),
        "{decisions}"
    );
    assert!(
        lines
            .iter()
            .any(|l| l.starts_with("RW-02,ph,,,note,lab asked to re-run")),
        "{decisions}"
    );
    assert!(
        lines
            .iter()
            .any(|l| l.starts_with("RW-04,,,,exclude,same bottle logged twice")),
        "{decisions}"
    );
    dir.cmd(["report", "s", "-o", "report.html"]).ok();
    let report = String::from_utf8(dir.read("report.html")).unwrap();
    assert!(report.contains("same bottle logged twice"));
    assert!(report.contains("RW-04"));

    // November: the condition finds the new row; the listed scale meets a value fixed at
    // source; the duplicate search finds none now.
    dir.cmd(["ingest", "nov.csv", "--table", "s", "-m", "November"])
        .ok();
    let carried = dir.cmd(["carry", "s", "--json"]).ok().json();
    let fixes = carried["fixes"].as_array().unwrap();
    let outcome = |needle: &str| {
        fixes
            .iter()
            .find(|f| f["description"].as_str().unwrap().contains(needle))
            .unwrap_or_else(|| panic!("{needle}: {carried:#}"))["outcome"]
            .clone()
    };
    assert_eq!(outcome("turn the sign of lon"), "applied");
    assert_eq!(outcome("scale ph by 10^-1"), "fixed at source");
    assert_eq!(outcome("repeat an earlier row"), "fixed at source");
    dir.cmd(["commit", "-m", "November carried"]).ok();
    let csv = dir.cmd(["export", "s"]).ok().stdout();
    assert_eq!(
        column(&csv, "lon"),
        ["-112.5", "-111.9", "-112.0", "-110.7", "-111.1"]
    );
    assert_eq!(column(&csv, "sampled_on")[4], "2026-01-17");
    dir.cmd(["verify"]).ok().says(&["intact"]);
}

#[test]
fn a_value_that_breaks_the_rules_in_force_needs_the_rule_named() {
    let dir = TestDir::new("decisions_rules");
    setup_store(&dir);
    dir.write("oct.csv", OCT);
    dir.write(
        "rules.toml",
        "[columns.ph]\ntype = \"decimal\"\nhard = { min = 0, max = 14 }\n",
    );
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "sample_id"])
        .ok();
    dir.cmd(["rules", "s", "rules.toml", "--why", "pH is 0 to 14"])
        .ok();
    dir.cmd(["set", "s", "RW-01", "ph", "abc", "--why", "x"])
        .fails(&["breaks rule ph.type", "--despite ph.type"]);
    dir.cmd([
        "set", "s", "ph", "--scale", "1", "--rows", "RW-01", "--why", "x",
    ])
    .fails(&["72 is above the hard maximum 14", "ph.hard"]);
    dir.cmd([
        "set",
        "s",
        "RW-01",
        "ph",
        "15",
        "--why",
        "meter read twice",
        "--despite",
        "ph.hard",
    ])
    .ok();
    dir.cmd([
        "set",
        "s",
        "RW-03",
        "ph",
        "7",
        "--why",
        "x",
        "--despite",
        "ph.hard",
    ])
    .fails(&["no new value of this fix breaks that rule"]);
    dir.cmd(["commit", "-m", "kept against the rule"]).ok();
    dir.cmd(["why", "s", "RW-01", "ph"])
        .ok()
        .says(&["meter read twice [despite rule ph.hard]"]);
}

#[test]
fn rows_a_rule_finds_are_chosen_by_its_id_and_found_again_on_the_next_extract() {
    let dir = TestDir::new("decisions_breaking");
    setup_store(&dir);
    dir.write("oct.csv", OCT);
    dir.write("nov.csv", NOV);
    // Longitudes of these (fictional) sites are west of Greenwich: a positive one is a sign slip.
    dir.write(
        "rules.toml",
        "[columns.lon]\ntype = \"decimal\"\nhard = { min = -180, max = 0 }\n",
    );
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "sample_id"])
        .ok();
    dir.cmd([
        "set",
        "s",
        "lon",
        "--negate",
        "--breaking",
        "lon.hard",
        "--why",
        "x",
    ])
    .fails(&["no rules adopted for 's'", "emend rules s FILE"]);
    dir.cmd(["rules", "s", "rules.toml", "--why", "west of Greenwich"])
        .ok();
    dir.cmd([
        "set",
        "s",
        "lon",
        "--negate",
        "--breaking",
        "lon.hrad",
        "--why",
        "x",
    ])
    .fails(&["no rule 'lon.hrad'", "lon.type, lon.hard"]);
    dir.cmd([
        "set",
        "s",
        "lon",
        "--negate",
        "--breaking",
        "lon.hard",
        "--rows",
        "RW-01",
        "--why",
        "x",
    ])
    .fails(&["cannot be used with"]);
    dir.cmd([
        "set",
        "s",
        "lon",
        "--negate",
        "--breaking",
        "lon.hard",
        "--why",
        "sign flipped by the app",
    ])
    .ok()
    .says(&[
        "rows breaking lon.hard",
        "changes 2 cells",
        "RW-01: '112.5' → '-112.5'",
    ]);
    // One row can also be named before the column, as for `set`.
    dir.cmd(["note", "s", "RW-02", "ph", "--why", "lab asked to re-run"])
        .ok()
        .says(&["note on ph in rows RW-02", "chooses 1 row"]);
    dir.cmd(["keep", "s", "RW-03", "ph", "--rows", "RW-04", "--why", "x"])
        .fails(&["name the row before the column, or choose rows"]);
    dir.cmd(["commit", "-m", "signs"]).ok();
    dir.cmd(["check", "s"]).ok();
    dir.cmd(["why", "s", "RW-05", "lon"])
        .ok()
        .says(&["rows breaking lon.hard", "sign flipped by the app"]);

    // November: the rule finds the new row RW-06 with the same slip.
    dir.cmd(["ingest", "nov.csv", "--table", "s", "-m", "November"])
        .ok();
    let carried = dir.cmd(["carry", "s", "--json"]).ok().json();
    assert_eq!(carried["fixes"][0]["outcome"], "applied", "{carried:#}");
    dir.cmd(["commit", "-m", "November carried"]).ok();
    let csv = dir.cmd(["export", "s"]).ok().stdout();
    assert_eq!(
        column(&csv, "lon"),
        ["-112.5", "-111.9", "-112.0", "-110.7", "-111.1"]
    );
    dir.cmd(["check", "s"]).ok();
    dir.cmd(["verify"]).ok().says(&["intact"]);
}

#[test]
fn a_withdrawn_fix_leaves_the_version_without_it() {
    let dir = TestDir::new("decisions_withdraw");
    setup_store(&dir);
    dir.write("oct.csv", OCT);
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "sample_id"])
        .ok();
    let raw = dir.cmd(["export", "s"]).ok().stdout();
    dir.cmd([
        "set", "s", "ph", "--scale", "-1", "--rows", "RW-02", "--why", "slipped",
    ])
    .ok();
    dir.cmd(["exclude", "s", "RW-04", "--why", "copy"]).ok();
    dir.cmd(["distrust", "s", "notes", "--why", "free text"])
        .ok();
    dir.cmd(["commit", "-m", "first pass"]).ok();
    dir.cmd(["log"])
        .ok()
        .says(&["2.1 scale ph", "2.2 exclude row RW-04", "2.3 distrust"]);
    for (n, why) in [
        ("2.1", "the expert corrected herself"),
        ("2.2", "not a copy"),
        ("2.3", "fine"),
    ] {
        dir.cmd(["withdraw", n, "--why", why])
            .ok()
            .says(&["withdraws:"]);
    }
    dir.cmd(["withdraw", "2.1", "--why", "again"])
        .fails(&["already withdrawn (pending)"]);
    dir.cmd(["withdraw", "1.1", "--why", "x"])
        .fails(&["records no fixes"]);
    dir.cmd(["withdraw", "seven", "--why", "x"])
        .fails(&["COMMIT.FIX"]);
    dir.cmd(["commit", "-m", "undo"]).ok();
    // The version is the raw one again; history keeps both commits.
    assert_eq!(
        dir.cmd(["export", "s", "--with-distrusted"]).ok().stdout(),
        raw
    );
    dir.cmd(["verify"]).ok().says(&["intact"]);
    dir.cmd(["why", "s", "RW-02", "ph"]).ok().says(&[
        "'71' → '7.1'",
        "'7.1' → '71'",
        "the expert corrected herself",
    ]);
    dir.cmd(["diff", "s", "2", "3"])
        .ok()
        .says(&["no longer excluded", "no longer distrusted"]);
    dir.cmd(["withdraw", "2.1", "--why", "again"])
        .fails(&["already withdrawn"]);
}

#[test]
fn show_finds_rows_by_key_position_and_condition_and_marks_decisions_in_text() {
    let dir = TestDir::new("decisions_show");
    setup_store(&dir);
    dir.write("oct.csv", OCT);
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "sample_id"])
        .ok();
    dir.cmd(["set", "s", "RW-02", "ph", "7.1", "--why", "lab sheet"])
        .ok();
    dir.cmd(["keep", "s", "lon", "--rows", "RW-05", "--why", "checked"])
        .ok();
    dir.cmd(["note", "s", "ph", "--rows", "RW-03", "--why", "re-run"])
        .ok();
    dir.cmd(["commit", "-m", "pass"]).ok();
    dir.cmd(["show", "s", "RW-02", "--cols", "ph"]).ok().says(&[
        "row RW-02",
        "7.1*",
        "* set by a fix",
    ]);
    dir.cmd(["show", "s", "#5", "--cols", "sample_id,lon"])
        .ok()
        .says(&["RW-05", "110.7=", "= kept on purpose"]);
    dir.cmd(["show", "s", "--where", "ph lt 7", "--cols", "sample_id,ph"])
        .ok()
        .says(&["2 rows where ph lt 7", "6.8!", "! noted for review"]);
    // Spaces at either end of a value are shown, quoted.
    dir.cmd(["show", "s", "RW-01", "--cols", "notes"])
        .ok()
        .says(&["'algae  '"]);
    dir.cmd(["show", "s", "RW-99"]).fails(&["RW-99"]);
    dir.cmd(["show", "s", "--where", "depth gt 1"])
        .fails(&["no column 'depth'"]);
}

#[test]
fn a_reviewers_file_of_decisions_is_recorded_all_or_none() {
    let dir = TestDir::new("decisions_apply");
    setup_store(&dir);
    dir.write("oct.csv", OCT);
    dir.write("mail.txt", "Corrections from the reviewer (fictional)\n");
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "sample_id"])
        .ok();
    dir.write(
        "bad.csv",
        "row,column,action,value,why\nRW-02,ph,set,7.1,lab sheet\nRW-77,ph,set,7,x\n",
    );
    dir.cmd(["decisions", "apply", "s", "bad.csv", "--why", "review"])
        .fails(&["bad.csv:3", "no decision of the file was recorded", "RW-77"]);
    dir.cmd(["status", "--json"])
        .ok()
        .says(&["\"pending\": []"]);
    dir.write("ragged.csv", "row,column,value\nRW-02,ph,7.1,extra\n");
    dir.cmd(["decisions", "apply", "s", "ragged.csv", "--why", "review"])
        .fails(&["ragged.csv:2", "4 fields where the header has 3"]);
    dir.write(
        "good.csv",
        "row,column,action,value,why\n\
         RW-02,ph,set,7.1,lab sheet\n\
         RW-05,lon,keep,,checked on the map\n\
         RW-03,,note,,ask the volunteer\n\
         RW-04,,exclude,,copy of RW-03\n",
    );
    dir.cmd([
        "decisions",
        "apply",
        "s",
        "good.csv",
        "--why",
        "reviewer's corrections",
        "--evidence",
        "mail.txt",
    ])
    .ok()
    .says(&["recorded 4 decisions"]);
    dir.cmd(["commit", "-m", "review"]).ok();
    dir.cmd(["why", "s", "RW-02", "ph"])
        .ok()
        .says(&["reviewer's corrections: lab sheet", "mail.txt"]);
    dir.cmd(["why", "s", "RW-05", "lon"])
        .ok()
        .says(&["kept on purpose"]);
    let csv = dir.cmd(["export", "s"]).ok().stdout();
    assert_eq!(
        column(&csv, "sample_id"),
        ["RW-01", "RW-02", "RW-03", "RW-05"]
    );
    dir.cmd(["verify"]).ok();
}
