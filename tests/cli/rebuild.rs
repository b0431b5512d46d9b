//! Rebuild: a chain of fix commits on a 30-row table. The test keeps its own model of the table
//! (a Vec of rows of Option<String>, changed by the test's own reading of each fix) and checks
//! that `export --at N` and `show --at N` agree with the model after every commit, with every
//! export option.

use crate::util::{TestDir, setup_store, write_csv};
use std::collections::BTreeSet;

#[derive(Clone, Debug)]
struct Model {
    header: Vec<String>,
    rows: Vec<(String, Vec<Option<String>>)>,
    excluded: BTreeSet<String>,
    distrusted: BTreeSet<usize>,
}

impl Model {
    fn col(&self, name: &str) -> usize {
        self.header
            .iter()
            .position(|h| h == name)
            .expect("model column")
    }

    fn row(&mut self, id: &str) -> &mut Vec<Option<String>> {
        &mut self
            .rows
            .iter_mut()
            .find(|(r, _)| r == id)
            .expect("model row")
            .1
    }

    /// The CSV `export` should write (minimal quoting, LF).
    fn render(&self, with_excluded: bool, with_distrusted: bool, na: &str) -> String {
        let keep: Vec<usize> = (0..self.header.len())
            .filter(|i| with_distrusted || !self.distrusted.contains(i))
            .collect();
        let mut out = vec![keep.iter().map(|&i| self.header[i].clone()).collect()];
        for (id, cells) in &self.rows {
            if self.excluded.contains(id) && !with_excluded {
                continue;
            }
            out.push(
                keep.iter()
                    .map(|&i| match &cells[i] {
                        Some(v) if !v.is_empty() => v.clone(),
                        _ => na.to_string(),
                    })
                    .collect(),
            );
        }
        write_csv(&out, ',')
    }
}

struct Sim<'a> {
    dir: &'a TestDir,
    model: Model,
    /// The model after each commit; index 0 is commit 1.
    at: Vec<Model>,
    n_maps: usize,
}

impl Sim<'_> {
    fn set(&mut self, row: &str, col: &str, value: Option<&str>) {
        let mut args = vec!["set", "samples", row, col];
        match value {
            Some(v) => args.push(v),
            None => args.push("--missing"),
        }
        args.extend(["--why", "checked against the field sheet"]);
        self.dir.cmd(&args).ok();
        let c = self.model.col(col);
        self.model.row(row)[c] = value.map(String::from);
    }

    fn recode(&mut self, col: &str, pairs: &[(&str, &str)]) {
        if let [(from, to)] = pairs {
            self.dir
                .cmd([
                    "recode",
                    "samples",
                    col,
                    "--from",
                    from,
                    "--to",
                    to,
                    "--why",
                    "variant",
                    "--allow-empty",
                ])
                .ok();
        } else {
            self.n_maps += 1;
            let name = format!("map{}.csv", self.n_maps);
            let rows: Vec<Vec<String>> = std::iter::once(vec!["from".into(), "to".into()])
                .chain(
                    pairs
                        .iter()
                        .map(|(f, t)| vec![f.to_string(), t.to_string()]),
                )
                .collect();
            self.dir.write(&name, &write_csv(&rows, ','));
            self.dir
                .cmd([
                    "recode",
                    "samples",
                    col,
                    "--map",
                    &name,
                    "--why",
                    "variants",
                    "--allow-empty",
                ])
                .ok();
        }
        let c = self.model.col(col);
        for (_, cells) in &mut self.model.rows {
            if let Some(v) = &cells[c]
                && let Some((_, to)) = pairs.iter().find(|(f, _)| f == v)
            {
                cells[c] = Some(to.to_string());
            }
        }
    }

    fn missing(&mut self, col: &str, codes: &[&str]) {
        // --why before --code: see bad_input::bug_missing_code_then_why_is_accepted.
        let mut args = vec![
            "missing",
            "samples",
            col,
            "--why",
            "sentinel",
            "--allow-empty",
            "--code",
        ];
        args.extend_from_slice(codes);
        self.dir.cmd(&args).ok();
        let c = self.model.col(col);
        for (_, cells) in &mut self.model.rows {
            if cells[c].as_deref().is_some_and(|v| codes.contains(&v)) {
                cells[c] = None;
            }
        }
    }

    fn exclude(&mut self, row: &str) {
        self.dir
            .cmd(["exclude", "samples", row, "--why", "duplicate visit"])
            .ok();
        self.model.excluded.insert(row.to_string());
    }

    fn distrust(&mut self, col: &str) {
        self.dir
            .cmd([
                "distrust",
                "samples",
                col,
                "--why",
                "meter never calibrated",
            ])
            .ok();
        let c = self.model.col(col);
        self.model.distrusted.insert(c);
    }

    fn commit(&mut self) {
        let n = self.at.len() + 1;
        self.dir
            .cmd(["commit", "-m", &format!("pass {n}")])
            .ok()
            .says(&[&format!("signed commit {n}")]);
        self.at.push(self.model.clone());
    }
}

fn extract() -> String {
    let sites = [
        "Alder Brook",
        "alder brook",
        "Fennel Run",
        "FENNEL RUN",
        "Quillet Marsh",
        "Quillet Mrsh",
    ];
    let mut rows = vec![
        [
            "sample_id",
            "site",
            "ph",
            "temp_c",
            "turbidity",
            "flow",
            "notes",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect::<Vec<_>>(),
    ];
    for i in 1..=30u32 {
        let ph = if i == 7 {
            "71".to_string()
        } else {
            format!("{}.{}", 6 + (5 + i % 10) / 10, (5 + i % 10) % 10)
        };
        let temp = if i % 9 == 0 {
            "-99".to_string()
        } else {
            format!("{}.{}", 10 + i % 8, i % 10)
        };
        let turbidity = if i % 5 == 0 {
            "-999".to_string()
        } else if i % 11 == 0 {
            "n/a".to_string()
        } else {
            format!("{}.{}", i % 6, i % 4)
        };
        let notes = if i % 4 == 0 {
            String::new()
        } else if i % 7 == 0 {
            "bank eroded, fence down".to_string()
        } else if i == 13 {
            "said \"murky\"".to_string()
        } else {
            "ok".to_string()
        };
        rows.push(vec![
            format!("S-{i:03}"),
            sites[i as usize % 6].to_string(),
            ph,
            temp,
            turbidity,
            (i * 3).to_string(),
            notes,
        ]);
    }
    write_csv(&rows, ',')
}

fn model_of(csv: &str) -> Model {
    let parsed = crate::util::parse_csv(csv, ',');
    Model {
        header: parsed[0].clone(),
        rows: parsed[1..]
            .iter()
            .map(|r| (r[0].clone(), r.iter().cloned().map(Some).collect()))
            .collect(),
        excluded: BTreeSet::new(),
        distrusted: BTreeSet::new(),
    }
}

#[test]
fn every_version_rebuilds_to_the_independent_model() {
    let dir = TestDir::new("rebuild");
    setup_store(&dir);
    let csv = extract();
    dir.write("samples.csv", &csv);
    dir.cmd([
        "ingest",
        "samples.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok()
    .says(&["30 rows × 7 columns"]);
    let raw = model_of(&csv);
    let mut sim = Sim {
        dir: &dir,
        model: raw.clone(),
        at: vec![raw.clone()],
        n_maps: 0,
    };

    // Commit 2: recode variants, declare a missing code.
    sim.recode(
        "site",
        &[("alder brook", "Alder Brook"), ("FENNEL RUN", "Fennel Run")],
    );
    sim.missing("turbidity", &["-999"]);
    sim.commit();
    // Commit 3: single cells, to a value and to missing, a value with a line break.
    sim.set("S-007", "ph", Some("7.1"));
    sim.set("S-012", "temp_c", None);
    sim.recode("site", &[("Quillet Mrsh", "Quillet Marsh")]);
    sim.set("S-020", "notes", Some("two\nlines"));
    sim.commit();
    // Commit 4: exclusions, a second missing code, a recode that also hits a value set by
    // commit 3 (S-007's 7.1).
    sim.exclude("S-004");
    sim.exclude("S-015");
    sim.missing("temp_c", &["-99"]);
    sim.recode("ph", &[("7.1", "7.10")]);
    sim.commit();
    // Commit 5: distrust a column, then set a cell in it and a cell of an excluded row.
    sim.distrust("flow");
    sim.set("S-002", "flow", Some("999"));
    sim.set("S-004", "ph", Some("6.0"));
    sim.commit();
    // Commit 6: the same cell set again; order inside one commit matters: a recode then a
    // set of a matching value (the set wins), a set then a recode (the recode rewrites it).
    sim.set("S-007", "ph", Some("7.2"));
    sim.recode("notes", &[("ok", "fine")]);
    sim.set("S-008", "notes", Some("ok"));
    sim.set("S-009", "site", Some("alder brook"));
    sim.recode("site", &[("alder brook", "Alder Brook")]);
    sim.commit();
    // Commit 7: several codes at once, a value with the delimiter, a cell back to missing.
    sim.missing("turbidity", &["n/a", "-1"]);
    sim.set("S-030", "site", Some("Quillet Marsh, east bank"));
    sim.set("S-013", "notes", None);
    sim.commit();
    // Commit 8: a missing cell gets a value again; a row set earlier is excluded.
    sim.set("S-011", "turbidity", Some("3.3"));
    sim.exclude("S-030");
    sim.commit();

    let head = sim.at.len();
    assert_eq!(head, 8);
    let option_sets: [(&[&str], bool, bool, &str); 5] = [
        (&[], false, false, ""),
        (&["--with-excluded"], true, false, ""),
        (&["--with-distrusted"], false, true, ""),
        (&["--na", "NA"], false, false, "NA"),
        (
            &["--with-excluded", "--with-distrusted", "--na", "-"],
            true,
            true,
            "-",
        ),
    ];
    for (n, model) in sim.at.iter().enumerate() {
        let seq = (n + 1).to_string();
        for (opts, ex, di, na) in option_sets {
            let mut args = vec!["export", "samples", "--at", &seq];
            args.extend_from_slice(opts);
            let got = dir.cmd(&args).ok().stdout();
            assert_eq!(
                got,
                model.render(ex, di, na),
                "export --at {seq} {opts:?} differs from the model"
            );
        }
        // show --json keeps missing (null) apart from blank ("") and flags exclusions.
        let show = dir
            .cmd(["show", "samples", "--at", &seq, "--rows", "1-100", "--json"])
            .ok()
            .json();
        let rows = show["rows"].as_array().unwrap();
        assert_eq!(rows.len(), 30);
        for (r, (id, cells)) in rows.iter().zip(&model.rows) {
            assert_eq!(r["row"], id.as_str());
            let got: Vec<Option<String>> = serde_json::from_value(r["cells"].clone()).unwrap();
            assert_eq!(&got, cells, "show --at {seq} row {id}");
            assert_eq!(
                r["excluded"],
                model.excluded.contains(id),
                "row {id} at {seq}"
            );
        }
        let distrusted: Vec<bool> = serde_json::from_value(show["distrusted"].clone()).unwrap();
        let expected: Vec<bool> = (0..7).map(|i| model.distrusted.contains(&i)).collect();
        assert_eq!(distrusted, expected, "distrusted at {seq}");
    }

    // latest = the newest commit; raw = the extract with no fixes; a hash prefix names a commit.
    let latest = dir.cmd(["export", "samples"]).ok().stdout();
    assert_eq!(latest, sim.at[head - 1].render(false, false, ""));
    assert_eq!(
        dir.cmd(["export", "samples", "--at", "raw"]).ok().stdout(),
        raw.render(false, false, "")
    );
    assert_eq!(
        raw.render(false, false, ""),
        csv,
        "the model's raw render is the extract"
    );
    let log = dir.cmd(["log", "--json"]).ok().json();
    let id5 = log["commits"][4]["id"].as_str().unwrap().to_string();
    for prefix in [&id5[..8], &id5[..12], id5.as_str()] {
        assert_eq!(
            dir.cmd(["export", "samples", "--at", prefix, "--na", "NA"])
                .ok()
                .stdout(),
            sim.at[4].render(false, false, "NA"),
            "--at {prefix}"
        );
    }
    // Cells changed per commit, counted from the model (edits where old != new).
    let changed: Vec<u64> = log["commits"].as_array().unwrap()[1..]
        .iter()
        .map(|c| {
            c["fixes"]
                .as_array()
                .unwrap()
                .iter()
                .map(|f| f["cells_changed"].as_u64().unwrap())
                .sum()
        })
        .collect();
    let expected_changed: Vec<u64> = sim
        .at
        .windows(2)
        .map(|w| {
            w[0].rows
                .iter()
                .zip(&w[1].rows)
                .map(|((_, a), (_, b))| a.iter().zip(b).filter(|(x, y)| x != y).count() as u64)
                .sum()
        })
        .collect();
    // Each fix counts the cells it changes, so the net model change undercounts only where two
    // fixes of one commit touch one cell: commit 6 sets S-009 site 'Fennel Run' -> 'alder
    // brook' and then recodes it to 'Alder Brook' (two edits, one net change).
    for (i, (got, want)) in changed.iter().zip(&expected_changed).enumerate() {
        let seq = i + 2;
        let extra = if seq == 6 { 1 } else { 0 };
        assert_eq!(*got, want + extra, "cells changed by commit {seq}");
    }

    let v = dir.cmd(["verify", "--json"]).ok().json();
    assert_eq!(v["intact"], true, "{v}");
    assert_eq!(v["checked"]["commits"], 8);
    assert_eq!(v["checked"]["table_versions"], 8);
}
