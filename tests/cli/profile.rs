//! Issue 4: the profile against a real open dataset (figures from pandas) and against the
//! problems planted in the demo data.

use crate::util::{TestDir, setup_store};
use serde_json::Value;

fn close(got: f64, want: f64, what: &str) {
    let tol = 1e-9 * want.abs().max(1.0);
    assert!(
        (got - want).abs() <= tol,
        "{what}: got {got}, pandas says {want}"
    );
}

/// Source: Palmer penguins data (CC0) from the PyPI package palmerpenguins 0.1.6; expected
/// figures computed by pandas 3.1.1 with tests/data/penguins_expected.py
/// (tests/data/penguins_expected.json).
#[test]
fn penguins_profile_matches_pandas() {
    let dir = TestDir::new("profile_penguins");
    setup_store(&dir);
    let data = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/data/penguins.csv");
    let expected: Value = serde_json::from_str(
        &std::fs::read_to_string(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/data/penguins_expected.json"
        ))
        .unwrap(),
    )
    .unwrap();
    dir.write_bytes("penguins.csv", &std::fs::read(data).unwrap());
    dir.cmd(["ingest", "penguins.csv", "--table", "penguins"])
        .ok();
    // pandas reads "NA" as missing by default; in emend that is a declared missing code.
    let cols = expected["columns"].as_object().unwrap();
    for (name, c) in cols {
        if c["missing"].as_u64().unwrap() > 0 {
            dir.cmd([
                "missing",
                "penguins",
                name,
                "--code",
                "NA",
                "--why",
                "the file writes NA for not measured",
            ])
            .ok();
        }
    }
    dir.cmd(["commit", "-m", "declare NA"]).ok();
    let p = dir.cmd(["profile", "penguins", "--json"]).ok().json();
    let profile = &p["profile"];
    assert_eq!(profile["n_rows"], expected["rows"]);
    for (name, want) in cols {
        let got = profile["columns"]
            .as_array()
            .unwrap()
            .iter()
            .find(|c| c["name"] == *name)
            .unwrap();
        let counts = &got["counts"];
        assert_eq!(counts["present"], want["count"], "{name}: count");
        let missing =
            counts["blank"].as_u64().unwrap() + counts["declared_missing"].as_u64().unwrap();
        assert_eq!(
            missing,
            want["missing"].as_u64().unwrap(),
            "{name}: missing"
        );
        assert_eq!(counts["distinct"], want["distinct"], "{name}: distinct");
        if let Some(mean) = want["mean"].as_f64() {
            let n = &got["numeric"];
            close(n["mean"].as_f64().unwrap(), mean, &format!("{name} mean"));
            close(
                n["std_dev"].as_f64().unwrap(),
                want["std"].as_f64().unwrap(),
                &format!("{name} sd"),
            );
            let q = &n["quartiles"];
            for (ours, theirs) in [
                ("min", "min"),
                ("q1", "25%"),
                ("median", "50%"),
                ("q3", "75%"),
                ("max", "max"),
            ] {
                close(
                    q[ours].as_f64().unwrap(),
                    want[theirs].as_f64().unwrap(),
                    &format!("{name} {ours}"),
                );
            }
        } else {
            let top: Vec<(String, u64)> = got["top_levels"]
                .as_array()
                .unwrap()
                .iter()
                .map(|l| {
                    (
                        l["value"].as_str().unwrap().to_string(),
                        l["count"].as_u64().unwrap(),
                    )
                })
                .collect();
            let want_top: Vec<(String, u64)> = want["top"]
                .as_array()
                .unwrap()
                .iter()
                .map(|l| (l[0].as_str().unwrap().to_string(), l[1].as_u64().unwrap()))
                .collect();
            assert_eq!(top, want_top, "{name}: value counts");
        }
    }
}

fn findings(p: &Value) -> Vec<(String, String, String)> {
    p["profile"]["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| {
            (
                f["column"].as_str().unwrap().to_string(),
                f["kind"].as_str().unwrap().to_string(),
                f["message"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

fn has(list: &[(String, String, String)], column: &str, kind: &str, text: &str) -> bool {
    list.iter()
        .any(|(c, k, m)| c == column && k == kind && m.contains(text))
}

#[test]
fn profile_finds_every_problem_planted_in_the_demo() {
    let dir = TestDir::new("profile_demo");
    dir.cmd(["demo", "d"]).ok();
    let out = dir.command_in(
        "d",
        ".identity",
        ["profile", "samples", "--at", "raw", "--json"],
    );
    let p = dir.run(out).ok().json();
    let f = findings(&p);
    let show = format!("{f:#?}");
    assert!(
        has(&f, "turbidity_ntu", "suspected_missing_code", "-999"),
        "{show}"
    );
    assert!(has(&f, "ph", "magnitude_error", "71 may be 7.1"), "{show}");
    assert!(
        has(&f, "water_temp_c", "magnitude_error", "185 may be 18.5"),
        "{show}"
    );
    assert!(
        has(&f, "site", "near_duplicate_levels", "Mill Craek"),
        "{show}"
    );
    assert!(
        has(&f, "site", "near_duplicate_levels", "mill creek"),
        "{show}"
    );
    assert!(
        has(&f, "site", "near_duplicate_levels", "Stony Ford."),
        "{show}"
    );
    assert!(has(&f, "weather", "write_ins", "windy, dry"), "{show}");
    assert!(has(&f, "calibrated", "constant", "no"), "{show}");
    // The out-of-range pH 14.8 is beyond the fences.
    let ph = p["profile"]["columns"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == "ph")
        .unwrap();
    let outside: Vec<f64> = ph["numeric"]["outside"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v["value"].as_f64().unwrap())
        .collect();
    assert!(
        outside.contains(&14.8) && outside.contains(&71.0),
        "{outside:?}"
    );
    // After the demo's cleaning pass, those problems are gone.
    let after = dir
        .run(dir.command_in("d", ".identity", ["profile", "samples", "--json"]))
        .ok()
        .json();
    let f = findings(&after);
    for (column, kind) in [
        ("turbidity_ntu", "suspected_missing_code"),
        ("ph", "magnitude_error"),
        ("site", "near_duplicate_levels"),
        ("weather", "write_ins"),
    ] {
        assert!(
            !f.iter().any(|(c, k, _)| c == column && k == kind),
            "{column} {kind} still found: {f:#?}"
        );
    }
    // The terminal form shows ready command lines.
    let text = dir
        .run(dir.command_in("d", ".identity", ["profile", "samples", "--at", "raw"]))
        .ok()
        .stdout();
    assert!(
        text.contains("try: emend missing samples turbidity_ntu --code -999 --why"),
        "{text}"
    );
}
