//! Issue 17: profile, check and export on two cores give exactly what one core gives.
//!
//! The reference is the one-thread run (`EMEND_THREADS=1`), which works row after row on the
//! calling thread as emend did before it used a second core; every other thread count must
//! print the same bytes. The table is the demo's, repeated to 12,000 rows so that the rows
//! span several batches, with a cell set and a row excluded so that edits and exclusions pass
//! through the batches too.

use crate::util::{TestDir, setup_store};

fn demo_table(n_rows: usize) -> String {
    let demo = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo/field_samples.csv"),
    )
    .expect("demo/field_samples.csv is in the repository");
    let mut lines = demo.lines();
    let header = lines.next().expect("a header");
    let body: Vec<&str> = lines.collect();
    let mut out = format!("{header}\n");
    for i in 0..n_rows {
        let line = body[i % body.len()];
        let rest = line.split_once(',').expect("a key column").1;
        out.push_str(&format!("S-{:05},{rest}\n", i + 1));
    }
    out
}

fn with_threads(dir: &TestDir, threads: &str, args: &[&str]) -> (Vec<u8>, i32) {
    let mut c = dir.command(args);
    c.env("EMEND_THREADS", threads);
    let out = dir.run(c);
    (out.stdout_bytes().to_vec(), out.status.code().unwrap_or(-1))
}

#[test]
fn one_core_and_several_give_the_same_bytes() {
    let dir = TestDir::new("cores_same_bytes");
    setup_store(&dir);
    dir.write("s.csv", &demo_table(12_000));
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "sample_id"])
        .ok();
    dir.cmd(["set", "s", "S-05000", "ph", "7.1", "--why", "lab sheet"])
        .ok();
    dir.cmd(["exclude", "s", "S-09000", "--why", "test row"])
        .ok();
    dir.cmd(["commit", "-m", "fixes"]).ok();
    let rules = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("demo/rules.toml"),
    )
    .expect("demo/rules.toml is in the repository");
    dir.write("rules.toml", &rules);
    dir.cmd(["rules", "s", "rules.toml", "--why", "the programme's rules"])
        .ok();
    for args in [
        &["profile", "s", "--json"][..],
        &["profile", "s", "--at", "raw", "--json"],
        &["profile", "s"],
        &["check", "s", "--json"],
        &["check", "s", "--all"],
        &["export", "s"],
    ] {
        let (one, code_one) = with_threads(&dir, "1", args);
        assert!(one.len() > 1000, "{args:?} printed {} bytes", one.len());
        for threads in ["2", "3"] {
            let (many, code) = with_threads(&dir, threads, args);
            assert_eq!(code, code_one, "{args:?}: exit code with {threads} threads");
            assert!(
                many == one,
                "{args:?} printed something else with {threads} threads than with one"
            );
        }
    }
    // The check finds what the demo's dirt breaks, so the examples are compared too.
    let report = dir.cmd(["check", "s", "--json"]).code(1).json();
    let broken = report["rules"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["violations"].as_u64().unwrap() > 0)
        .count();
    assert!(broken >= 3, "the demo table breaks several rules: {report}");
}

#[test]
fn a_bad_thread_count_is_refused() {
    let dir = TestDir::new("cores_bad_threads");
    setup_store(&dir);
    let mut c = dir.command(["tables"]);
    c.env("EMEND_THREADS", "none");
    dir.run(c)
        .code(2)
        .fails(&["EMEND_THREADS='none'", "EMEND_THREADS=1"]);
}
