//! Issue 6: the auditor's HTML report and the open-standard exports, on the demo store.

use crate::util::TestDir;
use scraper::{Html, Selector};
use serde_json::Value;

fn demo() -> TestDir {
    let dir = TestDir::new("report");
    dir.cmd(["demo", "d"]).ok();
    dir
}

fn run(dir: &TestDir, args: &[&str]) -> crate::util::Output {
    dir.run(dir.command_in("d", "d/.demo-identity", args))
}

fn sel(s: &str) -> Selector {
    Selector::parse(s).expect("selector")
}

fn fmt_count(n: u64) -> String {
    // Thousands separated by commas, as the report prints counts.
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

#[test]
fn report_holds_every_decision_and_plots_the_real_quartiles() {
    let dir = demo();
    run(&dir, &["tag", "approved-q3"]).ok();
    run(
        &dir,
        &[
            "report",
            "samples",
            "--at",
            "approved-q3",
            "-o",
            "audit.html",
        ],
    )
    .ok()
    .says(&["store intact"]);
    let html = String::from_utf8(dir.read("d/audit.html")).unwrap();
    let doc = Html::parse_document(&html);
    assert!(doc.errors.is_empty(), "HTML parse errors: {:?}", doc.errors);
    assert_eq!(doc.select(&sel("script")).count(), 0);
    assert!(
        !html.contains("http://") || !html.contains("src=\"http"),
        "no external assets"
    );
    let text: String = doc.root_element().text().collect::<Vec<_>>().join(" ");
    // Every fix reason and every changed-cell count from the signed log.
    let log = run(&dir, &["log", "--json"]).ok().json();
    let mut n_fixes = 0;
    for c in log["commits"].as_array().unwrap() {
        for f in c["fixes"].as_array().into_iter().flatten() {
            n_fixes += 1;
            let why = f["why"].as_str().unwrap();
            assert!(text.contains(why), "reason missing from the report: {why}");
            let n = f["cells_changed"].as_u64().unwrap();
            if n > 0 {
                assert!(text.contains(&fmt_count(n)), "cell count {n} missing");
            }
        }
    }
    assert!(n_fixes >= 8);
    // An SVG box plot per numeric column whose box sits at the profile's quartiles.
    let profile = run(&dir, &["profile", "samples", "--json"]).ok().json();
    let mut checked = 0;
    for col in profile["profile"]["columns"].as_array().unwrap() {
        let Some(q) = col["numeric"]["quartiles"].as_object() else {
            continue;
        };
        let name = col["name"].as_str().unwrap();
        let (q1, median, q3) = (
            q["q1"].as_f64().unwrap(),
            q["median"].as_f64().unwrap(),
            q["q3"].as_f64().unwrap(),
        );
        let mut found = false;
        for svg in doc.select(&sel("svg.boxplot")) {
            let lo: f64 = svg.value().attr("data-lo").unwrap().parse().unwrap();
            let hi: f64 = svg.value().attr("data-hi").unwrap().parse().unwrap();
            let width: f64 = svg.value().attr("data-width").unwrap().parse().unwrap();
            for g in svg.select(&sel("g.box.after")) {
                let attr = |k: &str| g.value().attr(k).unwrap().parse::<f64>().unwrap();
                if (attr("data-q1") - q1).abs() > 1e-9 || (attr("data-q3") - q3).abs() > 1e-9 {
                    continue;
                }
                assert!((attr("data-median") - median).abs() < 1e-9);
                let x = |v: f64| (v - lo) / (hi - lo) * width;
                let rect = g.select(&sel("rect.iqr")).next().expect("box");
                let rx: f64 = rect.value().attr("x").unwrap().parse().unwrap();
                let rw: f64 = rect.value().attr("width").unwrap().parse().unwrap();
                assert!(
                    (rx - x(q1)).abs() < 0.01,
                    "{name}: box starts at {rx}, q1 maps to {}",
                    x(q1)
                );
                assert!(
                    (rx + rw - x(q3)).abs() < 0.01,
                    "{name}: box ends at {}, q3 maps to {}",
                    rx + rw,
                    x(q3)
                );
                let m = g.select(&sel("line.median")).next().expect("median line");
                let mx: f64 = m.value().attr("x1").unwrap().parse().unwrap();
                assert!((mx - x(median)).abs() < 0.01, "{name}: median line");
                found = true;
            }
        }
        assert!(
            found,
            "no box plot for numeric column {name} with q1 {q1} q3 {q3}"
        );
        checked += 1;
    }
    assert!(checked >= 4, "numeric columns checked: {checked}");
    render_in_chromium(&dir.path("d/audit.html"));
}

/// Render the report in headless Chromium (Debian's `chromium`, installed by .ci/run) to a
/// PNG under target/, and fail on any console message. Without Chromium the check is skipped,
/// unless EMEND_REQUIRE_CHROMIUM is set (CI sets it), when it fails.
fn render_in_chromium(html: &std::path::Path) {
    let chromium = ["/usr/bin/chromium", "/usr/bin/chromium-browser"]
        .into_iter()
        .find(|p| std::path::Path::new(p).exists());
    let Some(chromium) = chromium else {
        assert!(
            std::env::var_os("EMEND_REQUIRE_CHROMIUM").is_none(),
            "chromium is required but not installed"
        );
        eprintln!("skipped: chromium is not installed (apt-get install chromium)");
        return;
    };
    let out_dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target");
    let png = out_dir.join("report-screenshot.png");
    let _ = std::fs::remove_file(&png);
    let profile = tempfile::tempdir().unwrap();
    let output = std::process::Command::new(chromium)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
            "--hide-scrollbars",
            "--window-size=1200,3000",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .arg(format!("--screenshot={}", png.display()))
        .arg(format!("file://{}", html.display()))
        .output()
        .expect("chromium runs");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(output.status.success(), "chromium failed: {stderr}");
    let console: Vec<&str> = stderr.lines().filter(|l| l.contains(":CONSOLE(")).collect();
    assert!(console.is_empty(), "console messages: {console:#?}");
    let bytes = std::fs::read(&png).expect("screenshot written");
    assert!(
        bytes.starts_with(b"\x89PNG\r\n\x1a\n") && bytes.len() > 10_000,
        "a real PNG"
    );
}

#[test]
fn codebook_and_provenance_follow_the_w3c_shapes() {
    let dir = demo();
    run(
        &dir,
        &[
            "export",
            "samples",
            "-o",
            "clean.csv",
            "--codebook",
            "clean.csv-metadata.json",
            "--provenance",
            "prov.json",
            "--decisions",
            "decisions.csv",
        ],
    )
    .ok();
    let reference = crate::testdata::reference("csvw_dialect_defaults.json");
    let cb: Value = serde_json::from_slice(&dir.read("d/clean.csv-metadata.json")).unwrap();
    // Source: W3C CSVW Metadata Vocabulary for Tabular Data (2015) §5.2 (@context), §5.4.1
    // (url), §5.5 (tableSchema, primaryKey), §5.6 (columns), §5.7 (null)
    // (tests/reference/csvw_dialect_defaults.json).
    assert!(reference.is_object());
    assert_eq!(cb["@context"][0], "http://www.w3.org/ns/csvw");
    assert_eq!(cb["url"], "clean.csv");
    assert_eq!(cb["tableSchema"]["primaryKey"], "sample_id");
    let cols = cb["tableSchema"]["columns"].as_array().unwrap();
    let header = std::fs::read_to_string(dir.path("d/clean.csv"))
        .unwrap()
        .lines()
        .next()
        .unwrap()
        .to_string();
    let names: Vec<&str> = cols.iter().map(|c| c["titles"].as_str().unwrap()).collect();
    assert_eq!(
        names.join(","),
        header,
        "one column description per exported column, in order"
    );
    let ph = cols.iter().find(|c| c["titles"] == "ph").unwrap();
    assert_eq!(ph["datatype"], "decimal");
    assert!(
        ph["null"]
            .as_array()
            .unwrap()
            .contains(&Value::String(String::new()))
    );
    let turb = cols
        .iter()
        .find(|c| c["titles"] == "turbidity_ntu")
        .unwrap();
    assert_eq!(
        turb["urn:emend:vocab#missingCodes"],
        serde_json::json!(["-999"])
    );
    // Source: W3C PROV-DM (2013) core relations and the PROV-JSON Member Submission key names
    // (tests/reference/prov_minimal.json).
    let prov_ref = crate::testdata::reference("prov_minimal.json");
    let prov: Value = serde_json::from_slice(&dir.read("d/prov.json")).unwrap();
    for key in prov_ref["minimal_document"].as_object().unwrap().keys() {
        assert!(prov.get(key).is_some(), "PROV-JSON key {key} missing");
    }
    let activities = prov["activity"].as_object().unwrap();
    assert_eq!(
        activities.len(),
        3,
        "ingest and two fix commits (the rules commit makes no version)"
    );
    let entities = prov["entity"].as_object().unwrap();
    assert!(entities.keys().any(|k| k.contains("extract-")));
    assert!(
        entities.keys().any(|k| k.contains("evidence-")),
        "the lab sheet is an entity"
    );
    assert_eq!(prov["agent"].as_object().unwrap().len(), 1);
    // Every relation points at declared things.
    for rel in [
        "wasGeneratedBy",
        "used",
        "wasDerivedFrom",
        "wasAssociatedWith",
        "wasAttributedTo",
    ] {
        for (_, r) in prov[rel].as_object().unwrap() {
            for (k, v) in r.as_object().unwrap() {
                if let Some(id) = v.as_str().filter(|s| s.starts_with("store:")) {
                    let known = entities.contains_key(id)
                        || activities.contains_key(id)
                        || prov["agent"].get(id).is_some();
                    assert!(known, "{rel}.{k} points at unknown {id}");
                }
            }
        }
    }
    // The decisions file: one row per cell edit of the version, one per row excluded, kept
    // or noted, and one per decision on no row (the rules adopted, the column distrusted).
    let decisions = std::fs::read_to_string(dir.path("d/decisions.csv")).unwrap();
    let rows = crate::util::parse_csv(&decisions, ',');
    assert_eq!(rows[0][..4], ["row", "column", "old", "new"]);
    assert_eq!(
        rows.len() - 1,
        136,
        "122 + 10 cells changed by the demo's two fix commits, one row excluded, one noted, the rules and the distrust"
    );
    assert!(rows.iter().any(|r| r[0] == "S-00977" && r[4] == "exclude"));
    assert!(
        rows.iter()
            .any(|r| r[0] == "S-01210" && r[1] == "ph" && r[4] == "note")
    );
    assert!(
        rows.iter()
            .any(|r| r[0] == "S-00412" && r[1] == "ph" && r[2] == "71" && r[3] == "7.1")
    );
}

/// Issue 15: a report after a second extract and `carry` tells the table's whole story: both
/// extracts' receipts, the rules, where each fix was carried, and the conflicts owed.
#[test]
fn a_report_after_carry_shows_both_extracts_the_rules_the_outcomes_and_the_conflicts() {
    let dir = TestDir::new("report_story");
    crate::util::setup_store(&dir);
    dir.write(
        "oct.csv",
        "id,site,ph\nA,mill creek,7\nB,Mill Creek,71\nC,heron,6\n",
    );
    dir.write(
        "nov.csv",
        "id,site,ph\nA,mill creek,7\nB,Mill Creek,7.1\nC,heron,65\nD,mill creek,7\n",
    );
    dir.write(
        "rules.toml",
        "[columns.ph]\ntype = \"decimal\"\nhard = { min = 0, max = 14 }\n",
    );
    dir.cmd(["ingest", "oct.csv", "--table", "s", "--key", "id"])
        .ok();
    dir.cmd(["rules", "s", "rules.toml", "--why", "pH runs 0 to 14"])
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
    dir.cmd(["commit", "-m", "October"]).ok(); // 3
    dir.cmd(["ingest", "nov.csv", "--table", "s", "-m", "November"])
        .ok(); // 4
    dir.cmd(["carry", "s"]).ok().says(&["[conflict]"]);
    let report = |name: &str| {
        dir.cmd(["report", "s", "-o", name]).ok();
        Html::parse_document(&String::from_utf8(dir.read(name)).unwrap())
    };
    let texts = |doc: &Html, css: &str| -> Vec<String> {
        doc.select(&sel(css))
            .map(|e| e.text().collect::<String>())
            .collect()
    };
    // While the conflict is open, the report says so.
    let open = report("open.html");
    let owed = texts(&open, "ul.owed li");
    assert!(
        owed.iter().any(|t| t.starts_with("open: set C ph")),
        "{owed:?}"
    );

    dir.cmd(["commit", "-m", "carried", "--defer-conflicts"])
        .ok(); // 5
    let doc = report("after.html");
    let receipts = texts(&doc, "p.receipt");
    assert_eq!(receipts.len(), 2, "{receipts:?}");
    assert!(
        receipts[0].starts_with("extract oct.csv: 3 rows × 3 columns"),
        "{receipts:?}"
    );
    assert!(
        receipts[1].starts_with("extract nov.csv: 4 rows × 3 columns"),
        "{receipts:?}"
    );
    let body = doc.root_element().text().collect::<String>();
    assert!(
        body.contains("adopt rules file rules.toml"),
        "the rules in force"
    );
    let carried = texts(&doc, "p.carried");
    for needle in [
        "carried to a later extract in commit 5",   // the recode
        "not carried onto the extract of commit 4", // set B: fixed at source
        "carried from commit 3",                    // the recode again, in November
    ] {
        assert!(
            carried.iter().any(|t| t.contains(needle)),
            "{needle}: {carried:?}"
        );
    }
    let owed = texts(&doc, "ul.owed li");
    assert!(
        owed.iter()
            .any(|t| t.starts_with("deferred in commit 5: note on ph in rows C")),
        "{owed:?}"
    );
    let noted = texts(&doc, "section[aria-labelledby=marks] td");
    assert!(noted.iter().any(|t| t == "C ph"), "{noted:?}");
    // Each column leads with what the cleaning did to it (November: the carried recode).
    let cleaning = texts(&doc, "p.cleaning");
    assert!(
        cleaning
            .iter()
            .any(|t| t
                .starts_with("The cleaning changed 2 cells of this column, by 1 fix: recode site")),
        "{cleaning:?}"
    );
    // Both months' fixes are there, and the figure of changed cells is this version's.
    assert!(body.contains("October") && body.contains("carried"));
}
