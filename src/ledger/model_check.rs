//! Property test: random fixes that choose rows by condition or by key and transform cells,
//! with random withdrawals, committed against a real store; after every commit the rebuilt
//! version equals an independent model of the table (numbers compared as numbers, written by
//! floating point here and as decimal text by the library), and withdrawing a fix gives the
//! version without it.

use super::testkit::{NOW, ctx, signer};
use super::{FixRequest, commit_pending, ingest, record_fix};
use crate::ingest::IngestOptions;
use crate::model::edit::{Clause, Rows, Transform};
use crate::model::{FixAction, RowId};
use crate::query::Version;
use crate::store::Store;
use std::ops::ControlFlow;

struct Rng(u64);

impl Rng {
    fn next(&mut self, n: u64) -> u64 {
        // xorshift64* (Vigna 2016), enough for choosing test cases.
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) % n
    }
}

const N: usize = 24;
const SITES: [&str; 4] = ["Fox Run", " Heron  Pool", "Mill Creek ", "Stony Ford"];

/// The model: one Vec of cells per row (site, ph, lon), and per committed fix the cells it
/// changed (row, column, old, new), by (commit, 1-based fix).
struct Model {
    rows: Vec<[Option<String>; 3]>,
    changed: Vec<((u64, u64), Vec<Changed>)>,
}

/// A cell a fix changed in the model: row, column, old, new.
type Changed = (usize, usize, Option<String>, Option<String>);

fn num(v: &Option<String>) -> Option<f64> {
    v.as_deref().and_then(|s| s.parse::<f64>().ok())
}

fn fmt(x: f64) -> String {
    let s = format!("{x:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.into() }
}

impl Model {
    /// Applies a fix to the model (its own arithmetic, in floating point) and returns the
    /// cells it changed.
    fn apply(&mut self, action: &FixAction) -> Vec<Changed> {
        let mut out = Vec::new();
        match action {
            FixAction::Edit {
                column,
                rows,
                transform,
            } => {
                let c = ["site", "ph", "lon"]
                    .iter()
                    .position(|h| h == column)
                    .unwrap();
                for r in 0..N {
                    let chosen = match rows {
                        Rows::Listed(list) => list.iter().any(|id| id.0 == format!("R{r:02}")),
                        Rows::Where(clauses) => clauses.iter().all(|cl| {
                            let k = ["site", "ph", "lon"]
                                .iter()
                                .position(|h| *h == cl.column)
                                .unwrap();
                            let (Some(x), Ok(y)) =
                                (num(&self.rows[r][k]), cl.values[0].parse::<f64>())
                            else {
                                return false;
                            };
                            match cl.test.as_str() {
                                "gt" => x > y,
                                "lt" => x < y,
                                _ => unreachable!(),
                            }
                        }),
                        Rows::Duplicates(_) | Rows::Breaking { .. } => unreachable!(),
                    };
                    if !chosen {
                        continue;
                    }
                    let old = self.rows[r][c].clone();
                    let new = match transform {
                        Transform::Negate => num(&old).map(|x| fmt(-x)),
                        Transform::Scale(p) => num(&old).map(|x| fmt(x * 10f64.powi(*p))),
                        Transform::Spaces => old
                            .as_ref()
                            .map(|s| s.split_whitespace().collect::<Vec<_>>().join(" ")),
                        Transform::Value(v) => v.clone(),
                        _ => unreachable!(),
                    };
                    let same = match (num(&old), num(&new)) {
                        (Some(a), Some(b)) if c > 0 => (a - b).abs() < 1e-9,
                        _ => old == new,
                    };
                    if !same {
                        self.rows[r][c] = new.clone();
                        out.push((r, c, old, new));
                    }
                }
            }
            FixAction::Withdraw { seq, fix } => {
                let list = self
                    .changed
                    .iter()
                    .find(|(k, _)| *k == (*seq, *fix))
                    .map(|(_, l)| l.clone())
                    .unwrap();
                for (r, c, old, new) in list {
                    let holds = match (num(&self.rows[r][c]), num(&new)) {
                        (Some(a), Some(b)) if c > 0 => (a - b).abs() < 1e-9,
                        _ => self.rows[r][c] == new,
                    };
                    if holds {
                        out.push((r, c, self.rows[r][c].clone(), old.clone()));
                        self.rows[r][c] = old;
                    }
                }
            }
            _ => unreachable!(),
        }
        out
    }
}

fn random_fix(rng: &mut Rng, committed: &[(u64, u64)], withdrawn: &[(u64, u64)]) -> FixAction {
    let clause = |column: &str, test: &str, v: f64| Clause {
        column: column.into(),
        test: test.into(),
        values: vec![fmt(v)],
    };
    match rng.next(6) {
        0 => FixAction::Edit {
            column: "lon".into(),
            rows: Rows::Where(vec![clause("lon", "gt", 0.0)]),
            transform: Transform::Negate,
        },
        1 => FixAction::Edit {
            column: "ph".into(),
            rows: Rows::Where(vec![clause("ph", "gt", 14.0)]),
            transform: Transform::Scale(-1),
        },
        2 => FixAction::Edit {
            column: "site".into(),
            rows: Rows::Where(Vec::new()),
            transform: Transform::Spaces,
        },
        3 => {
            let r = rng.next(N as u64);
            FixAction::Edit {
                column: "ph".into(),
                rows: Rows::Listed(vec![RowId(format!("R{r:02}"))]),
                transform: Transform::Value(Some(fmt(rng.next(90) as f64 / 10.0 + 5.0))),
            }
        }
        4 => FixAction::Edit {
            column: "lon".into(),
            rows: Rows::Where(vec![clause("ph", "lt", 7.0), clause("lon", "lt", -100.0)]),
            transform: Transform::Scale(1),
        },
        _ => {
            let live: Vec<&(u64, u64)> = committed
                .iter()
                .filter(|k| !withdrawn.contains(k))
                .collect();
            match live.get(rng.next(live.len().max(1) as u64) as usize) {
                Some(&&(seq, fix)) => FixAction::Withdraw { seq, fix },
                None => FixAction::Edit {
                    column: "lon".into(),
                    rows: Rows::Where(vec![clause("lon", "gt", 0.0)]),
                    transform: Transform::Negate,
                },
            }
        }
    }
}

#[test]
fn random_conditions_transforms_and_withdrawals_rebuild_to_the_model() {
    let mut n_withdrawn = 0;
    for seed in 1..=12u64 {
        let mut rng = Rng(seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) | 1);
        let dir = tempfile::tempdir().unwrap();
        let csv = dir.path().join("t.csv");
        let mut text = String::from("id,site,ph,lon\n");
        let mut model = Model {
            rows: Vec::new(),
            changed: Vec::new(),
        };
        for r in 0..N {
            let site = SITES[rng.next(4) as usize].to_owned();
            let ph = fmt(if rng.next(5) == 0 {
                70.0 + rng.next(9) as f64
            } else {
                6.0 + rng.next(20) as f64 / 10.0
            });
            let lon =
                fmt(if rng.next(3) == 0 { 1.0 } else { -1.0 }
                    * (100.0 + rng.next(300) as f64 / 10.0));
            text.push_str(&format!("R{r:02},\"{site}\",{ph},{lon}\n"));
            model.rows.push([Some(site), Some(ph), Some(lon)]);
        }
        std::fs::write(&csv, text).unwrap();
        let mut store = Store::init(dir.path(), NOW).unwrap();
        let opts = IngestOptions {
            table: "t".into(),
            key: vec!["id".into()],
            ..IngestOptions::default()
        };
        let s = signer();
        ingest(&mut store, &csv, &opts, "extract", &ctx(&s)).unwrap();
        let mut committed: Vec<(u64, u64)> = Vec::new();
        let mut withdrawn: Vec<(u64, u64)> = Vec::new();
        for round in 0..6 {
            let seq = round + 2;
            let mut pending = Vec::new();
            for _ in 0..=rng.next(2) {
                let action = random_fix(&mut rng, &committed, &withdrawn);
                if let FixAction::Withdraw { seq, fix } = action
                    && (withdrawn.contains(&(seq, fix)) || pending.contains(&action))
                {
                    continue;
                }
                let req = FixRequest {
                    table: "t".into(),
                    action: action.clone(),
                    why: format!("seed {seed} round {round}"),
                    evidence: Vec::new(),
                    consulted: None,
                    allow_empty: true,
                    despite: None,
                    by: None,
                };
                record_fix(&mut store, req, NOW, &Default::default()).unwrap();
                pending.push(action);
            }
            commit_pending(&mut store, "round", &ctx(&s)).unwrap();
            for (i, action) in pending.iter().enumerate() {
                let cells = model.apply(action);
                let key = (seq, i as u64 + 1);
                if let FixAction::Withdraw { seq, fix } = action {
                    withdrawn.push((*seq, *fix));
                }
                model.changed.push((key, cells));
                committed.push(key);
            }
            let reader = store.read();
            let v = Version::load(&reader, "t", seq, false).unwrap();
            let mut r = 0;
            v.for_each_row(&reader, |row| {
                for c in 0..3 {
                    let got = &row.cells[c + 1];
                    let want = &model.rows[r][c];
                    let same = match (num(got), num(want)) {
                        (Some(a), Some(b)) if c > 0 => (a - b).abs() < 1e-9,
                        _ => got == want,
                    };
                    assert!(
                        same,
                        "seed {seed} round {round} row {r} col {c}: {got:?} != {want:?}"
                    );
                }
                r += 1;
                Ok(ControlFlow::Continue(()))
            })
            .unwrap();
            assert_eq!(r, N);
            // The signed version hash is the rebuilt one.
            let report = crate::query::verify::verify(
                &reader,
                &crate::query::verify::Trust::Store,
                &mut |_| {},
            )
            .unwrap();
            assert!(
                report.problems.is_empty(),
                "seed {seed}: {:?}",
                report.problems
            );
        }
        n_withdrawn += withdrawn.len();
    }
    assert!(n_withdrawn >= 5, "the cases withdraw fixes ({n_withdrawn})");
}
