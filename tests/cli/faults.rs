//! Issue 8: faults. Processes killed with SIGKILL at random points during ingest, commit and
//! carry leave a store that opens, verifies, and holds each commit whole or not at all; several
//! processes writing at once land every fix exactly once on a linear chain.
//!
//! CI runs a few trials; the long form is
//! `EMEND_CRASH_TRIALS=50 cargo test --release --test cli faults -- --nocapture`
//! (docs/reliability.md reports its figures).

use crate::util::{TestDir, setup_store};
use std::process::Stdio;
use std::time::{Duration, Instant};

fn trials() -> usize {
    std::env::var("EMEND_CRASH_TRIALS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(3)
}

/// Deterministic pseudo-random delays.
struct Lcg(u64);
impl Lcg {
    fn below(&mut self, n: u64) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 33) % n.max(1)
    }
}

fn big_csv(rows: usize, tweak: &str) -> String {
    let mut s = String::with_capacity(rows * 40);
    s.push_str("id,site,reading,note\n");
    for i in 0..rows {
        let site = if i % 7 == 0 {
            "mill creek"
        } else {
            "Mill Creek"
        };
        s.push_str(&format!("K{i:07},{site},{}.{},{tweak}\n", i % 97, i % 10));
    }
    s
}

fn commits(dir: &TestDir) -> usize {
    dir.cmd(["log", "--json"]).ok().json()["commits"]
        .as_array()
        .unwrap()
        .len()
}

/// Run `args`, kill it after `delay`, and report whether it had finished by itself.
fn run_and_kill(dir: &TestDir, args: &[&str], delay: Duration) -> bool {
    let mut child = dir
        .command(args)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("spawn emend");
    let start = Instant::now();
    while start.elapsed() < delay {
        if child.try_wait().expect("wait").is_some() {
            return true;
        }
        std::thread::sleep(Duration::from_millis(1));
    }
    // On Unix, kill() is SIGKILL: no chance to clean up.
    let _ = child.kill();
    let status = child.wait().expect("reap");
    status.success()
}

fn timed(dir: &TestDir, args: &[&str]) -> Duration {
    let start = Instant::now();
    dir.cmd(args).ok();
    start.elapsed()
}

#[test]
fn killed_ingest_commit_and_carry_leave_whole_commits() {
    let n = trials();
    let mut rng = Lcg(42);
    let mut finished = [0usize; 3];
    // Calibrate: how long each operation takes uninterrupted on this machine.
    let probe = TestDir::new("crash_probe");
    setup_store(&probe);
    probe.write("a.csv", &big_csv(60_000, "a"));
    probe.write("b.csv", &big_csv(60_000, "b"));
    let t_ingest = timed(&probe, &["ingest", "a.csv", "--table", "t", "--key", "id"]);
    probe
        .cmd([
            "recode",
            "t",
            "site",
            "--from",
            "mill creek",
            "--to",
            "Mill Creek",
            "--why",
            "case",
        ])
        .ok();
    let t_commit = timed(&probe, &["commit", "-m", "fix"]);
    probe.cmd(["ingest", "b.csv", "--table", "t"]).ok();
    let t_carry = timed(&probe, &["carry", "t"]);
    for trial in 0..n {
        // Ingest.
        let dir = TestDir::new("crash_ingest");
        setup_store(&dir);
        dir.write_bytes("a.csv", &probe.read("a.csv"));
        let delay = Duration::from_micros(rng.below(t_ingest.as_micros() as u64 * 12 / 10));
        let done = run_and_kill(
            &dir,
            &["ingest", "a.csv", "--table", "t", "--key", "id"],
            delay,
        );
        dir.cmd(["verify"]).ok();
        let c = commits(&dir);
        assert!(c <= 1, "trial {trial}: {c} commits after one ingest");
        if c == 1 {
            finished[0] += 1;
            let raw = dir.cmd(["export", "t", "--raw"]).ok();
            assert_eq!(
                raw.stdout_bytes(),
                &dir.read("a.csv")[..],
                "trial {trial}: the commit is whole"
            );
        } else {
            assert!(
                !done,
                "trial {trial}: a finished ingest must have committed"
            );
            dir.cmd(["ingest", "a.csv", "--table", "t", "--key", "id"])
                .ok();
        }
        // Commit of pending fixes.
        dir.cmd([
            "recode",
            "t",
            "site",
            "--from",
            "mill creek",
            "--to",
            "Mill Creek",
            "--why",
            "case",
        ])
        .ok();
        let delay = Duration::from_micros(rng.below(t_commit.as_micros() as u64 * 12 / 10));
        run_and_kill(&dir, &["commit", "-m", "fix"], delay);
        dir.cmd(["verify"]).ok();
        let status = dir.cmd(["status", "--json"]).ok().json();
        let pending = status["pending"].as_array().unwrap().len();
        match commits(&dir) {
            2 => {
                finished[1] += 1;
                assert_eq!(
                    pending, 0,
                    "trial {trial}: committed fixes are no longer pending"
                );
                let d = dir.cmd(["diff", "t", "1", "2", "--json"]).ok().json();
                assert_eq!(
                    d["tables"][0]["cells"].as_array().unwrap().len(),
                    60_000usize.div_ceil(7)
                );
            }
            1 => {
                assert_eq!(
                    pending, 1,
                    "trial {trial}: an interrupted commit leaves the fix pending"
                );
                dir.cmd(["commit", "-m", "fix"]).ok();
            }
            other => panic!("trial {trial}: {other} commits"),
        }
        // Carry onto a second extract.
        dir.write_bytes("b.csv", &probe.read("b.csv"));
        dir.cmd(["ingest", "b.csv", "--table", "t"]).ok();
        let delay = Duration::from_micros(rng.below(t_carry.as_micros() as u64 * 12 / 10));
        run_and_kill(&dir, &["carry", "t"], delay);
        dir.cmd(["verify"]).ok();
        let pending = dir.cmd(["status", "--json"]).ok().json()["pending"]
            .as_array()
            .unwrap()
            .len();
        assert!(pending <= 1, "trial {trial}: carry stages one fix or none");
        if pending == 1 {
            finished[2] += 1;
        }
        dir.cmd(["discard"]).ok();
        dir.cmd(["carry", "t"]).ok();
        dir.cmd(["commit", "-m", "carried"]).ok();
        dir.cmd(["verify"]).ok();
    }
    eprintln!(
        "crash trials: {n} per command; completed before the kill: ingest {}, commit {}, carry {}",
        finished[0], finished[1], finished[2]
    );
}

#[test]
fn concurrent_writers_land_every_fix_once_on_a_linear_chain() {
    let dir = TestDir::new("concurrency");
    setup_store(&dir);
    dir.write("t.csv", &big_csv(2_000, "x"));
    dir.cmd(["ingest", "t.csv", "--table", "t", "--key", "id"])
        .ok();
    let writers = 4;
    let rounds = 5;
    let handles: Vec<_> = (0..writers)
        .map(|w| {
            let cmds: Vec<Vec<String>> = (0..rounds)
                .flat_map(|r| {
                    let row = format!("K{:07}", w * 100 + r);
                    vec![
                        vec![
                            "set".into(),
                            "t".into(),
                            row,
                            "note".into(),
                            format!("w{w}-r{r}"),
                            "--why".into(),
                            format!("writer {w} round {r}"),
                        ],
                        vec![
                            "commit".into(),
                            "-m".into(),
                            format!("writer {w} round {r}"),
                        ],
                    ]
                })
                .collect();
            let built: Vec<std::process::Command> = cmds.iter().map(|c| dir.command(c)).collect();
            std::thread::spawn(move || {
                let mut failures = Vec::new();
                for mut c in built {
                    let out = c.output().expect("run emend");
                    let stderr = String::from_utf8_lossy(&out.stderr).into_owned();
                    // Another writer may have committed this writer's pending fix already.
                    if !out.status.success() && !stderr.contains("nothing to commit") {
                        failures.push(stderr);
                    }
                }
                failures
            })
        })
        .collect();
    for h in handles {
        let failures = h.join().expect("writer thread");
        assert!(failures.is_empty(), "{failures:#?}");
    }
    dir.cmd(["verify"]).ok();
    let log = dir.cmd(["log", "--json"]).ok().json();
    let list = log["commits"].as_array().unwrap();
    for (i, c) in list.iter().enumerate() {
        assert_eq!(c["seq"].as_u64().unwrap(), i as u64 + 1, "linear sequence");
        if i > 0 {
            assert_eq!(
                c["parent"],
                list[i - 1]["id"],
                "each commit names the one before"
            );
        }
    }
    let mut landed: Vec<String> = list
        .iter()
        .flat_map(|c| c["fixes"].as_array().cloned().unwrap_or_default())
        .map(|f| f["value"].as_str().unwrap().to_string())
        .collect();
    landed.sort();
    let mut expected: Vec<String> = (0..writers)
        .flat_map(|w| (0..rounds).map(move |r| format!("w{w}-r{r}")))
        .collect();
    expected.sort();
    assert_eq!(landed, expected, "every fix exactly once");
    let pending = dir.cmd(["status", "--json"]).ok().json();
    assert_eq!(pending["pending"].as_array().unwrap().len(), 0);
}

/// A writer that finds the store locked by another for longer than its bounded wait (10 s)
/// gives up with a clear message and changes nothing.
#[test]
fn a_busy_store_makes_a_writer_wait_then_fail_clearly() {
    let dir = TestDir::new("busy");
    setup_store(&dir);
    dir.write("t.csv", "id,v\nA,1\n");
    dir.cmd(["ingest", "t.csv", "--table", "t", "--key", "id"])
        .ok();
    let before = crate::util::store_state(&dir);
    let lock = crate::util::open_db(&dir);
    lock.execute_batch("BEGIN IMMEDIATE")
        .expect("take the write lock");
    let started = Instant::now();
    let out = dir
        .cmd(["set", "t", "A", "v", "2", "--why", "while locked"])
        .code(2);
    let waited = started.elapsed();
    out.fails(&["busy", "another emend process"]);
    assert!(
        waited >= Duration::from_secs(9),
        "it waited {waited:?} before giving up"
    );
    assert!(
        waited < Duration::from_secs(30),
        "the wait is bounded: {waited:?}"
    );
    lock.execute_batch("ROLLBACK").expect("release");
    drop(lock);
    assert_eq!(crate::util::store_state(&dir), before);
    dir.cmd(["set", "t", "A", "v", "2", "--why", "after the lock"])
        .ok();
}

/// Issue 16: `withdraw`, `decisions apply`, and the receipt added after a commit, each killed
/// with SIGKILL at a random point, leave a store that verifies, with each commit and each
/// batch of decisions whole or absent, and a receipt file whose every receipt holds.
#[test]
fn killed_withdraw_decisions_and_receipts_leave_whole_results() {
    let n = trials();
    let mut rng = Lcg(1616);
    let mut finished = [0usize; 3];
    let template = TestDir::new("crash16_template");
    setup_store(&template);
    template.write("a.csv", &big_csv(60_000, "a"));
    template
        .cmd(["ingest", "a.csv", "--table", "t", "--key", "id"])
        .ok();
    template
        .cmd([
            "recode",
            "t",
            "site",
            "--from",
            "mill creek",
            "--to",
            "Mill Creek",
            "--why",
            "case",
        ])
        .ok();
    template.cmd(["commit", "-m", "fix"]).ok();
    // A reviewer's 200 decisions, recorded all or none.
    let mut review = String::from("row,column,action,value,why\n");
    for i in 0..200 {
        review.push_str(&format!(
            "K{:07},reading,set,{}.25,reviewed\n",
            i * 293,
            i % 90
        ));
    }
    template.write("review.csv", &review);
    let probe = TestDir::new("crash16_probe");
    probe.copy_from(&template);
    let t_withdraw_commit = {
        probe.cmd(["withdraw", "2.1", "--why", "undo"]).ok();
        timed(&probe, &["commit", "-m", "undo"])
    };
    let t_apply = timed(
        &probe,
        &["decisions", "apply", "t", "review.csv", "--why", "review"],
    );
    let t_commit = timed(&probe, &["commit", "-m", "review"]);
    for trial in 0..n {
        let dir = TestDir::new("crash16");
        dir.copy_from(&template);
        // A withdrawal, committed and killed.
        dir.cmd(["withdraw", "2.1", "--why", "undo"]).ok();
        let delay =
            Duration::from_micros(rng.below(t_withdraw_commit.as_micros() as u64 * 12 / 10));
        run_and_kill(&dir, &["commit", "-m", "undo"], delay);
        dir.cmd(["verify"]).ok();
        match commits(&dir) {
            3 => {
                finished[0] += 1;
                let d = dir.cmd(["diff", "t", "2", "3", "--json"]).ok().json();
                assert_eq!(
                    d["tables"][0]["cells"].as_array().unwrap().len(),
                    60_000usize.div_ceil(7),
                    "trial {trial}: the withdrawal reverses every cell of the fix"
                );
            }
            2 => {
                dir.cmd(["commit", "-m", "undo"]).ok();
            }
            other => panic!("trial {trial}: {other} commits"),
        }
        // Decisions applied and killed: all 200 pending or none.
        let delay = Duration::from_micros(rng.below(t_apply.as_micros() as u64 * 12 / 10));
        run_and_kill(
            &dir,
            &["decisions", "apply", "t", "review.csv", "--why", "review"],
            delay,
        );
        dir.cmd(["verify"]).ok();
        let pending = dir.cmd(["status", "--json"]).ok().json()["pending"]
            .as_array()
            .unwrap()
            .len();
        assert!(
            pending == 0 || pending == 200,
            "trial {trial}: {pending} of 200 decisions pending"
        );
        if pending == 200 {
            finished[1] += 1;
        } else {
            dir.cmd(["decisions", "apply", "t", "review.csv", "--why", "review"])
                .ok();
        }
        // The commit killed while receipts are kept automatically.
        let mut c = dir.command(["commit", "-m", "review"]);
        c.env("EMEND_RECEIPTS", dir.path("kept.txt"))
            .stdout(Stdio::null())
            .stderr(Stdio::null());
        let mut child = c.spawn().expect("spawn emend");
        let delay = Duration::from_micros(rng.below(t_commit.as_micros() as u64 * 15 / 10));
        std::thread::sleep(delay);
        let _ = child.kill();
        let _ = child.wait();
        dir.cmd(["verify"]).ok();
        if dir.path("kept.txt").exists() && !dir.read("kept.txt").is_empty() {
            finished[2] += 1;
            dir.cmd(["verify", "--receipt", "kept.txt"]).ok();
        }
    }
    eprintln!(
        "crash trials (issue 16): {n} per command; completed before the kill: withdraw commit {}, decisions apply {}, commit with its receipt {}",
        finished[0], finished[1], finished[2]
    );
}
