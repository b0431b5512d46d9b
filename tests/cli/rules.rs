//! Issue 5: rules files adopted into history and checked at any revision.

use crate::util::{TestDir, setup_store, store_state};

const DATA: &str = "id,site,ph,training_done,score\nA,Mill Creek,7.1,yes,8\nB,Mill Creek,71,no,\nC,Otter Bend,6.9,no,5\nD,otter bend,,yes,7\n";

const RULES_V1: &str = r#"
[columns.id]
required = true
unique = true

[columns.site]
levels = ["Mill Creek", "Otter Bend"]

[columns.ph]
type = "decimal"
required = true
hard = { min = 0, max = 14 }   # physical fact (common knowledge): the pH scale runs from 0 to 14

[[conditions]]
id = "no-score-without-training"
when = { column = "training_done", test = "eq", value = "no" }
then = { column = "score", test = "is missing" }
"#;

fn ids(report: &serde_json::Value) -> Vec<(String, u64)> {
    report["rules"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["violations"].as_u64().unwrap() > 0)
        .map(|r| {
            (
                r["id"].as_str().unwrap().to_string(),
                r["violations"].as_u64().unwrap(),
            )
        })
        .collect()
}

#[test]
fn rules_in_history_check_each_revision_with_its_own_rules() {
    let dir = TestDir::new("rules_history");
    setup_store(&dir);
    dir.write("s.csv", DATA);
    dir.write("rules.toml", RULES_V1);
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok();
    dir.cmd(["check", "s"]).code(2).fails(&["no rules adopted"]);
    dir.cmd([
        "rules",
        "s",
        "rules.toml",
        "--why",
        "bounds agreed with the programme scientist",
    ])
    .ok();
    let r = dir.cmd(["check", "s", "--json"]).code(1).json();
    assert_eq!(r["passed"], false);
    assert_eq!(
        ids(&r),
        [
            ("site.levels".to_string(), 1),
            ("ph.required".to_string(), 1),
            ("ph.hard".to_string(), 1),
            ("no-score-without-training".to_string(), 1),
        ]
    );
    // The violating rows are named.
    let hard = r["rules"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["id"] == "ph.hard")
        .unwrap();
    assert_eq!(hard["examples"][0]["row"], "B");
    assert_eq!(hard["examples"][0]["value"], "71");
    dir.cmd(["set", "s", "B", "ph", "7.1", "--why", "lab sheet"])
        .ok();
    dir.cmd([
        "recode",
        "s",
        "site",
        "--from",
        "otter bend",
        "--to",
        "Otter Bend",
        "--why",
        "case",
    ])
    .ok();
    dir.cmd(["set", "s", "D", "ph", "7.0", "--why", "re-measured"])
        .ok();
    dir.cmd([
        "set",
        "s",
        "C",
        "score",
        "--missing",
        "--why",
        "no score without training",
    ])
    .ok();
    dir.cmd(["commit", "-m", "clean"]).ok();
    let r = dir.cmd(["check", "s", "--json"]).ok().json();
    assert_eq!(r["passed"], true, "{r:#}");
    // Stricter rules adopted later: the latest version fails them, commit 3 still passes the
    // rules it was checked against (the ones in force then).
    dir.write("rules.toml", &RULES_V1.replace("max = 14", "max = 7.05"));
    dir.cmd([
        "rules",
        "s",
        "rules.toml",
        "--why",
        "tighter bound for this river",
    ])
    .ok();
    let latest = dir.cmd(["check", "s", "--json"]).code(1).json();
    assert_eq!(ids(&latest), [("ph.hard".to_string(), 2)]);
    let then = dir.cmd(["check", "s", "--at", "3", "--json"]).ok().json();
    assert_eq!(then["passed"], true);
    assert!(then["rules_source"].as_str().unwrap().contains("commit 2"));
    // --rules tries a file that is not adopted, and changes nothing.
    let before = store_state(&dir);
    dir.write("try.toml", "[columns.ph]\nhard = { max = 6 }\n");
    let tried = dir
        .cmd(["check", "s", "--rules", "try.toml", "--json"])
        .code(1)
        .json();
    assert_eq!(ids(&tried), [("ph.hard".to_string(), 4)]);
    assert_eq!(store_state(&dir), before);
    dir.cmd(["log"]).ok().says(&["adopt rules file rules.toml"]);
    dir.cmd(["verify"]).ok();
}

#[test]
fn bad_rules_files_name_line_and_key_and_commit_nothing() {
    let dir = TestDir::new("rules_errors");
    setup_store(&dir);
    dir.write("s.csv", DATA);
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok();
    let before = store_state(&dir);
    let cases = [
        (
            "[columns.ph]\ntype = \"decimal\"\nmaximum = 14\n",
            &["line 3", "maximum"][..],
        ),
        (
            "[columns.ph]\nhard = { min = 14, max = 0 }\n",
            &["line 2", "hard"][..],
        ),
        (
            "[columns.ph]\nrequired = \"yes\"\n",
            &["line 2", "required"][..],
        ),
        (
            "[columns.site]\npattern = '(unclosed'\n",
            &["line 2", "pattern"][..],
        ),
        ("[columns.nope]\nrequired = true\n", &["line 1", "nope"][..]),
        (
            "[[conditions]]\nwhen = { column = \"ph\", test = \"roughly\", value = 1 }\nthen = { column = \"ph\", test = \"is present\" }\n",
            &["line 2", "roughly"][..],
        ),
        ("[columns.ph\n", &["line 1"][..]),
    ];
    for (text, needles) in cases {
        dir.write("bad.toml", text);
        let out = dir.cmd(["rules", "s", "bad.toml", "--why", "try"]).code(2);
        out.fails(needles);
        assert_eq!(store_state(&dir), before, "{text}");
    }
    dir.write("ok.toml", "[columns.ph]\nhard = { min = 0, max = 14 }\n");
    dir.cmd(["rules", "s", "ok.toml", "--why", ""])
        .code(2)
        .fails(&["--why is empty"]);
    dir.cmd(["rules", "s", "missing.toml", "--why", "x"])
        .code(2)
        .fails(&["missing.toml"]);
    assert_eq!(store_state(&dir), before);
}
