//! The team store (issue 19), against a real PostgreSQL server: `.ci/pg start` makes a
//! throwaway cluster and `.ci/run` hands its superuser's address to the tests as
//! `EMEND_TEST_PG`. Without it these tests say so and pass, unless `EMEND_REQUIRE_PG=1` (as
//! in CI), when they fail. Each test makes its own database and roles, so they run in
//! parallel on one cluster.
//!
//! What is checked against PostgreSQL itself: its privilege system refuses an auditor's write
//! (SQLSTATE 42501, insufficient_privilege, from the PostgreSQL manual's error-code appendix),
//! its row lock serialises publishers, and its transactions leave nothing of a killed client.

use crate::util::{Output, TestDir};
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicU32, Ordering};
use std::time::Duration;

/// The test cluster's superuser address, if there is one.
fn cluster() -> Option<String> {
    match std::env::var("EMEND_TEST_PG") {
        Ok(url) if !url.trim().is_empty() => Some(url.trim().to_string()),
        _ => {
            if std::env::var("EMEND_REQUIRE_PG").as_deref() == Ok("1") {
                panic!(
                    "EMEND_REQUIRE_PG=1 but EMEND_TEST_PG names no server (.ci/pg start makes one)"
                );
            }
            eprintln!("team tests skipped: no EMEND_TEST_PG (see DEVELOPERS.md, '.ci/pg start')");
            None
        }
    }
}

static NEXT: AtomicU32 = AtomicU32::new(0);

/// One test's database on the cluster, its roles (prefixed with the database's name), and a
/// folder per person.
struct Team {
    dir: TestDir,
    super_url: String,
    host_port: String,
    db: String,
    p: String,
}

impl Team {
    fn new(name: &str) -> Option<Team> {
        let url = cluster()?;
        let host_port = url
            .split('@')
            .nth(1)
            .and_then(|r| r.split('/').next())
            .expect("EMEND_TEST_PG is postgres://USER@HOST:PORT/DB")
            .to_string();
        let p = format!(
            "t{}_{}_{}",
            std::process::id(),
            NEXT.fetch_add(1, Ordering::SeqCst),
            name
        );
        let t = Team {
            dir: TestDir::new(&format!("team-{name}")),
            super_url: url,
            host_port,
            db: p.clone(),
            p: p.clone(),
        };
        // The administrator's part, as docs/team-roles.sql does it, with this test's names.
        t.sql_on(
            "postgres",
            &format!(
                "CREATE ROLE {p}_writer NOLOGIN; CREATE ROLE {p}_auditor NOLOGIN;
                 CREATE ROLE {p}_owner LOGIN; CREATE ROLE {p}_auditor1 LOGIN IN ROLE {p}_auditor;
                 CREATE DATABASE {p} OWNER {p}_owner;
                 REVOKE ALL ON DATABASE {p} FROM PUBLIC;
                 GRANT CONNECT ON DATABASE {p} TO {p}_writer, {p}_auditor;"
            ),
        )
        .expect("roles and a database for the test");
        Some(t)
    }

    fn client(&self, db: &str, role: &str) -> postgres::Client {
        let url = format!("postgres://{role}@{}/{db}", self.host_port);
        postgres::Client::connect(&url, postgres::NoTls).expect("connect to the test cluster")
    }

    /// Run SQL as the cluster's superuser on database `db`, one statement at a time (CREATE
    /// DATABASE may not share a transaction); a `$$` block is sent whole.
    fn sql_on(&self, db: &str, sql: &str) -> Result<(), postgres::Error> {
        let base = self.super_url.rsplit_once('/').expect("a database").0;
        let mut c = postgres::Client::connect(&format!("{base}/{db}"), postgres::NoTls)
            .expect("connect as superuser");
        if sql.contains("$$") {
            return c.batch_execute(sql);
        }
        for stmt in sql.split(';').filter(|s| !s.trim().is_empty()) {
            c.batch_execute(stmt)?;
        }
        Ok(())
    }

    /// Run SQL as the superuser on this test's database.
    fn sql(&self, sql: &str) {
        self.sql_on(&self.db, sql).expect("superuser SQL");
    }

    /// One number from this test's database, as the superuser.
    fn number(&self, sql: &str) -> i64 {
        let base = self.super_url.rsplit_once('/').expect("a database").0;
        let mut c = postgres::Client::connect(&format!("{base}/{}", self.db), postgres::NoTls)
            .expect("connect as superuser");
        c.query_one(sql, &[]).expect("a number").get(0)
    }

    fn role(&self, who: &str) -> String {
        format!("{}_{who}", self.p)
    }

    fn addr(&self, who: &str) -> String {
        format!(
            "postgres://{}@{}/{}",
            self.role(who),
            self.host_port,
            self.db
        )
    }

    /// `emend ARGS` in folder `who` with identity `h-who`.
    fn run(&self, who: &str, args: &[&str]) -> Output {
        std::fs::create_dir_all(self.dir.path(who)).expect("a folder");
        self.dir
            .run(self.dir.command_in(who, &format!("h-{who}"), args))
    }

    fn command(&self, who: &str, args: &[&str]) -> Command {
        std::fs::create_dir_all(self.dir.path(who)).expect("a folder");
        self.dir.command_in(who, &format!("h-{who}"), args)
    }

    /// The owner starts the team store from a store holding the river extract; each analyst
    /// gets a login in the writers' role, joins, and is vouched for by the owner.
    fn start(&self, analysts: &[&str]) {
        self.run("owner", &["id", "new", "--name", "Olu Owner"])
            .ok();
        self.dir
            .write("owner/river.csv", crate::walkthrough::RIVER_CSV);
        self.run("owner", &["init"]).ok();
        self.run(
            "owner",
            &[
                "ingest",
                "river.csv",
                "--table",
                "samples",
                "--key",
                "sample_id",
            ],
        )
        .ok();
        self.run(
            "owner",
            &[
                "init",
                "--team",
                &self.addr("owner"),
                "--writers",
                &self.role("writer"),
                "--auditors",
                &self.role("auditor"),
            ],
        )
        .ok()
        .says(&["team store ready", "published this store's 1 commit"]);
        for a in analysts {
            self.sql_on(
                "postgres",
                &format!(
                    "CREATE ROLE {} LOGIN IN ROLE {}",
                    self.role(a),
                    self.role("writer")
                ),
            )
            .expect("an analyst's login");
            self.run(a, &["id", "new", "--name", &format!("Analyst {a}")])
                .ok();
            self.run(a, &["join", &self.addr(a)])
                .ok()
                .says(&["joined:", "not yet trusted"]);
            let key = self.run(a, &["id", "show", "--key"]).ok().stdout();
            self.run(
                "owner",
                &[
                    "trust",
                    key.trim(),
                    "--name",
                    &format!("Analyst {a}"),
                    "--why",
                    "team analyst",
                ],
            )
            .ok();
        }
        self.run("owner", &["publish"]).ok();
        for a in analysts {
            self.run(a, &["receive"]).ok().says(&["received:"]);
        }
    }

    fn head(&self) -> i64 {
        self.number("SELECT head_seq FROM emend.team")
    }
}

impl Drop for Team {
    fn drop(&mut self) {
        let p = &self.p;
        let _ = self.sql_on(
            "postgres",
            &format!("DROP DATABASE IF EXISTS {p} WITH (FORCE)"),
        );
        let _ = self.sql_on(
            "postgres",
            &format!(
                "DO $$ DECLARE r text; BEGIN
                   FOR r IN SELECT rolname FROM pg_roles WHERE rolname LIKE '{p}\\_%' LOOP
                     EXECUTE format('DROP ROLE %I', r);
                   END LOOP; END $$;"
            ),
        );
    }
}

/// The cleaned table as `who` exports it, as (sample_id, volunteer) pairs.
fn volunteers(t: &Team, who: &str) -> Vec<(String, String)> {
    let out = t.run(who, &["export", "samples"]).ok().stdout();
    let rows = crate::util::parse_csv(&out, ',');
    let col = rows[0]
        .iter()
        .position(|c| c == "volunteer")
        .expect("volunteer column");
    rows[1..]
        .iter()
        .map(|r| (r[0].clone(), r[col].clone()))
        .collect()
}

fn publish_all_at_once(t: &Team, who: &[String]) -> Vec<(String, Output)> {
    let children: Vec<(String, std::process::Child, Command)> = who
        .iter()
        .map(|w| {
            let mut c = t.command(w, &["publish"]);
            c.stdout(Stdio::piped()).stderr(Stdio::piped());
            let child = c.spawn().expect("spawn publish");
            (w.clone(), child, t.command(w, &["publish"]))
        })
        .collect();
    children
        .into_iter()
        .map(|(w, child, c)| {
            let out = child.wait_with_output().expect("publish ends");
            (w, crate::util::Output::from_parts(&t.dir, &c, out))
        })
        .collect()
}

fn analysts_publishing_at_once(n: usize) {
    let names: Vec<String> = (1..=n).map(|i| format!("a{i}")).collect();
    let refs: Vec<&str> = names.iter().map(String::as_str).collect();
    let Some(t) = Team::new(&format!("race{n}")) else {
        return;
    };
    t.start(&refs);
    let start_head = t.head();
    // Each analyst sets one volunteer code of their own row, and commits.
    for (i, a) in names.iter().enumerate() {
        let row = format!("RW-00{}", i + 1);
        t.run(
            a,
            &[
                "set",
                "samples",
                &row,
                "volunteer",
                &format!("vol-9{i}"),
                "--why",
                "roster check",
            ],
        )
        .ok();
        t.run(a, &["commit", "-m", &format!("roster check by {a}")])
            .ok();
    }
    let mut waiting = names.clone();
    let mut rounds = 0;
    while !waiting.is_empty() {
        rounds += 1;
        assert!(
            rounds <= n + 1,
            "publishing never settled: {waiting:?} still waiting"
        );
        let results = publish_all_at_once(&t, &waiting);
        let won: Vec<&String> = results
            .iter()
            .filter(|(_, o)| o.status_code() == Some(0))
            .map(|(w, _)| w)
            .collect();
        assert_eq!(
            won.len(),
            1,
            "exactly one of {} publishing at once wins: {:?}",
            waiting.len(),
            results
                .iter()
                .map(|(w, o)| (w, o.stdout(), o.stderr()))
                .collect::<Vec<_>>()
        );
        for (w, o) in &results {
            if o.status_code() != Some(0) {
                assert!(
                    o.stderr().contains("the team moved on")
                        && o.stderr().contains("emend receive"),
                    "{w} lost and is told to receive: {}",
                    o.stderr()
                );
            }
        }
        let winner = won[0].clone();
        waiting.retain(|w| *w != winner);
        // Each loser receives: its commit is set aside, its fix replayed and staged.
        for w in &waiting {
            t.run(w, &["receive"]).ok().says(&["set aside", "staged"]);
            t.run(w, &["commit", "-m", &format!("roster check by {w}, again")])
                .ok();
        }
    }
    // One chain, every commit there: nothing lost.
    assert_eq!(t.head(), start_head + n as i64);
    assert_eq!(
        t.number("SELECT count(*) FROM emend.commit_log"),
        start_head + n as i64
    );
    t.run("owner", &["receive"]).ok();
    let vols = volunteers(&t, "owner");
    for i in 0..n {
        let row = format!("RW-00{}", i + 1);
        let v = vols
            .iter()
            .find(|(id, _)| *id == row)
            .expect("row")
            .1
            .clone();
        assert_eq!(v, format!("vol-9{i}"), "{row} holds its analyst's value");
    }
    t.run("owner", &["verify", "--team", &t.addr("auditor1")])
        .ok()
        .says(&["intact:"]);
    t.run("owner", &["verify"]).ok().says(&["intact:"]);
}

#[test]
fn two_analysts_publishing_at_once_make_one_chain_and_the_loser_replays() {
    analysts_publishing_at_once(2);
}

#[test]
fn four_analysts_publishing_at_once_make_one_chain_and_the_losers_replay() {
    analysts_publishing_at_once(4);
}

/// A large extract (about 8 MB), so a publish takes long enough to be killed midway.
fn big_csv(rows: usize) -> String {
    let mut s = String::from("id,site,reading,note\n");
    let mut x: u64 = 0x9e37_79b9_7f4a_7c15;
    for i in 0..rows {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        s.push_str(&format!(
            "R{i:07},site-{},{}.{:03},n{:x}\n",
            x % 97,
            x % 1000,
            x % 997,
            x
        ));
    }
    s
}

#[test]
fn a_publisher_killed_midway_leaves_the_server_unchanged_or_complete() {
    let Some(t) = Team::new("kill") else {
        return;
    };
    t.start(&["ana"]);
    let before = t.head();
    t.dir.write("ana/big.csv", &big_csv(150_000));
    t.run(
        "ana",
        &["ingest", "big.csv", "--table", "readings", "--key", "id"],
    )
    .ok();
    let mut outcomes = Vec::new();
    for delay_ms in [30u64, 120, 300] {
        let mut c = t.command("ana", &["publish"]);
        c.stdout(Stdio::null()).stderr(Stdio::null());
        let mut child = c.spawn().expect("spawn publish");
        std::thread::sleep(Duration::from_millis(delay_ms));
        let _ = child.kill(); // SIGKILL
        let _ = child.wait();
        let head = t.head();
        let commits = t.number("SELECT count(*) FROM emend.commit_log");
        let files = t.number("SELECT count(*) FROM emend.blob");
        if head == before {
            // Unchanged: the killed transaction left nothing behind.
            assert_eq!(commits, before, "no commit of a killed publish remains");
            assert_eq!(files, 1, "no stored file of a killed publish remains");
            outcomes.push("unchanged");
        } else {
            assert_eq!(
                head,
                before + 1,
                "complete: the head moved onto the new commit"
            );
            assert_eq!(commits, before + 1);
            outcomes.push("complete");
            break;
        }
    }
    // Whatever happened, the server verifies and a publish finishes the job.
    t.run("ana", &["verify", "--team", &t.addr("auditor1")])
        .ok()
        .says(&["intact:"]);
    t.run("ana", &["publish"]).ok();
    assert_eq!(t.head(), before + 1);
    assert_eq!(t.number("SELECT count(*) FROM emend.blob"), 2);
    t.run("ana", &["verify", "--team", &t.addr("auditor1")])
        .ok()
        .says(&["intact:"]);
    assert!(!outcomes.is_empty());
}

#[test]
fn a_server_gone_mid_receive_leaves_the_local_store_unchanged() {
    let Some(t) = Team::new("gone") else {
        return;
    };
    t.start(&["ana", "ben"]);
    t.dir.write("ana/big.csv", &big_csv(150_000));
    t.run(
        "ana",
        &["ingest", "big.csv", "--table", "readings", "--key", "id"],
    )
    .ok();
    t.run("ana", &["publish"]).ok();
    let log_before = t.run("ben", &["log", "--json"]).ok().stdout();
    // The server ends ben's session while the receive runs (as a server shut down or
    // restarted does): PostgreSQL's pg_terminate_backend.
    let mut c = t.command("ben", &["receive"]);
    c.stdout(Stdio::piped()).stderr(Stdio::piped());
    let child = c.spawn().expect("spawn receive");
    let ben = t.role("ben");
    let mut ended = 0;
    for _ in 0..400 {
        ended = t.number(&format!(
            "SELECT count(pg_terminate_backend(pid)) FROM pg_stat_activity WHERE usename = '{ben}'"
        ));
        if ended > 0 {
            break;
        }
        std::thread::sleep(Duration::from_millis(5));
    }
    let out = child.wait_with_output().expect("receive ends");
    if ended > 0 && !out.status.success() {
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(
            err.contains("cannot reach the team store"),
            "a clear error: {err}"
        );
        assert_eq!(
            t.run("ben", &["log", "--json"]).ok().stdout(),
            log_before,
            "the local store is unchanged"
        );
        t.run("ben", &["verify"]).ok().says(&["intact:"]);
    }
    // The next receive brings everything.
    t.run("ben", &["receive"]).ok();
    t.run("ben", &["show", "readings", "R0149999"])
        .ok()
        .says(&["R0149999"]);
    t.run("ben", &["verify"]).ok().says(&["intact:"]);
}

#[test]
fn an_auditor_reads_and_verifies_but_postgresql_refuses_its_writes() {
    let Some(t) = Team::new("audit") else {
        return;
    };
    t.start(&["ana"]);
    t.run("auditor1", &["id", "new", "--name", "Ines Auditor"])
        .ok();
    t.run("auditor1", &["join", &t.addr("auditor1")]).ok();
    t.run("auditor1", &["export", "samples"])
        .ok()
        .says(&["RW-001"]);
    t.run("auditor1", &["tag", "audited"]).ok();
    t.run("auditor1", &["publish"])
        .fails(&["refused", "permission denied"]);
    // Straight to the server: the auditor's role may not write at all.
    let mut auditor = t.client(&t.db, &t.role("auditor1"));
    for sql in [
        "INSERT INTO emend.receipt (head_seq, text) VALUES (1, 'x')",
        "UPDATE emend.team SET head_seq = 1",
        "DELETE FROM emend.commit_log",
    ] {
        let e = auditor.batch_execute(sql).expect_err(sql);
        assert_eq!(
            e.code(),
            Some(&postgres::error::SqlState::INSUFFICIENT_PRIVILEGE),
            "{sql}: {e}"
        );
    }
    // A writer may append but never change or remove an object: the triggers refuse.
    let mut writer = t.client(&t.db, &t.role("ana"));
    for sql in [
        "UPDATE emend.commit_log SET signature = signature",
        "DELETE FROM emend.chunk",
        "TRUNCATE emend.blob_chunk",
        "UPDATE emend.team SET head_seq = 1",
    ] {
        assert!(writer.batch_execute(sql).is_err(), "{sql} is refused");
    }
    // Nor may the owner.
    let mut owner = t.client(&t.db, &t.role("owner"));
    let e = owner
        .batch_execute("DELETE FROM emend.commit_log WHERE seq = 1")
        .expect_err("the owner's delete");
    let said = e
        .as_db_error()
        .map(|d| d.message().to_string())
        .unwrap_or_default();
    assert!(said.contains("append-only"), "{said}");
    assert_eq!(t.number("SELECT count(*) FROM emend.commit_log"), t.head());
}

#[test]
fn a_commit_forged_or_history_cut_on_the_server_is_caught() {
    let Some(t) = Team::new("forge") else {
        return;
    };
    t.start(&["ana", "ben"]);
    t.run(
        "ana",
        &[
            "set",
            "samples",
            "RW-002",
            "ph",
            "7.1",
            "--why",
            "lab sheet",
        ],
    )
    .ok();
    t.run("ana", &["commit", "-m", "ph from the lab sheet"])
        .ok();
    t.run("ana", &["publish"]).ok();
    let head = t.head();
    t.run("owner", &["verify", "--team", &t.addr("auditor1")])
        .ok();
    // A superuser rewrites the signed body of ana's commit (one byte), past the triggers.
    t.sql(&format!(
        "ALTER TABLE emend.commit_log DISABLE TRIGGER USER;
         UPDATE emend.commit_log SET body = overlay(body placing '\\x41'::bytea from length(body) - 3 for 1)
             WHERE seq = {head};
         ALTER TABLE emend.commit_log ENABLE TRIGGER USER;"
    ));
    t.run("owner", &["verify", "--team", &t.addr("auditor1")])
        .code(1)
        .says(&["NOT INTACT", &format!("commit {head}")]);
    // Ben has not received it yet: receive refuses it and changes nothing.
    let before = t.run("ben", &["log", "--json"]).ok().stdout();
    t.run("ben", &["receive"])
        .fails(&["disagree", "body was changed"]);
    assert_eq!(t.run("ben", &["log", "--json"]).ok().stdout(), before);

    // History cut: the superuser removes the last commit and moves the head back.
    t.sql(&format!(
        "ALTER TABLE emend.commit_log DISABLE TRIGGER USER;
         ALTER TABLE emend.team DISABLE TRIGGER USER;
         DELETE FROM emend.commit_log WHERE seq = {head};
         UPDATE emend.team SET head_seq = {prev}, head_id = (SELECT id FROM emend.commit_log WHERE seq = {prev});
         ALTER TABLE emend.commit_log ENABLE TRIGGER USER;
         ALTER TABLE emend.team ENABLE TRIGGER USER;",
        prev = head - 1
    ));
    // Ana holds the cut commit: her store refuses to follow.
    t.run("ana", &["receive"])
        .fails(&["cut from the team's history"]);
    // The receipts published with each head show the cut to an auditor.
    t.run("owner", &["verify", "--team", &t.addr("auditor1")])
        .code(1)
        .says(&["HISTORY CUT"]);
}
