//! Issue 16: attacks by whoever holds the store file, each reproduced with plain SQL or the file
//! system, and the refusal or detection expected. The table in docs/reliability.md names these
//! tests.

use crate::tamper::{TRIGGERS, template};
use crate::util::{TestDir, open_db, store_state};
use rusqlite::params;

fn drop_guards(c: &rusqlite::Connection) {
    c.execute_batch("PRAGMA foreign_keys = OFF").unwrap();
    for t in TRIGGERS {
        c.execute_batch(&format!("DROP TRIGGER IF EXISTS {t}"))
            .unwrap();
    }
}

/// Put the guard triggers back, as emend makes them, so only the attack itself differs.
fn restore_guards(c: &rusqlite::Connection) {
    let fresh = rusqlite::Connection::open_in_memory().unwrap();
    let dir = TestDir::new("attacks_fresh_schema");
    crate::util::setup_store(&dir);
    let made = open_db(&dir);
    let mut stmt = made
        .prepare("SELECT sql FROM sqlite_schema WHERE type = 'trigger'")
        .unwrap();
    let sqls: Vec<String> = stmt
        .query_map([], |r| r.get(0))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    drop(fresh);
    for sql in sqls {
        c.execute_batch(&sql).unwrap();
    }
}

fn copy_of_template(name: &str) -> TestDir {
    let template = template();
    let dir = TestDir::new(name);
    dir.copy_from(&template);
    dir
}

/// Cut the newest commits, with their index rows and tags, the way someone who holds the
/// file and knows the schema would.
fn cut_after(dir: &TestDir, keep: i64) {
    let c = open_db(dir);
    drop_guards(&c);
    for t in ["row_map", "mark", "version_index", "extract_index", "tag"] {
        c.execute(&format!("DELETE FROM {t} WHERE seq > ?1"), params![keep])
            .unwrap();
    }
    c.execute("DELETE FROM commit_log WHERE seq > ?1", params![keep])
        .unwrap();
    restore_guards(&c);
}

#[test]
fn cutting_the_newest_commits_passes_verify_but_not_a_receipt() {
    let dir = copy_of_template("attack_cut");
    let r = dir.cmd(["receipt", "-o", "receipt.txt"]).ok();
    assert!(r.stderr().contains("commit 3"), "{}", r.stderr());
    dir.cmd(["verify", "--receipt", "receipt.txt"])
        .ok()
        .says(&["receipt holds:", "commit 3"]);
    cut_after(&dir, 2);
    // Without a receipt nothing inside the store can show the cut (the doc says so plainly).
    dir.cmd(["verify"]).ok().says(&["intact:"]);
    let v = dir.cmd(["verify", "--receipt", "receipt.txt"]).code(1);
    let text = v.stdout();
    assert!(text.contains("HISTORY CUT"), "{text}");
    assert!(text.contains("the store ends at commit 2"), "{text}");
    assert!(text.contains("commit 3 is gone"), "{text}");
    let j = dir
        .cmd(["verify", "--receipt", "receipt.txt", "--json"])
        .code(1)
        .json();
    assert_eq!(j["intact"], false);
    assert_eq!(j["receipts"][0]["holds"], false);
    assert_eq!(j["receipts"][0]["commit"], 3);
}

#[test]
fn replacing_the_store_with_an_older_copy_is_caught_by_a_receipt() {
    let dir = copy_of_template("attack_old_copy");
    let older = std::fs::read(dir.store_file()).unwrap();
    dir.cmd(["tag", "reviewed", "--note", "sent to the lab"])
        .ok();
    // Receipts appended to one file, one per head, as 'receipt --append' or --keep-in keep them.
    dir.cmd(["receipt", "--append", "receipts.txt"]).ok();
    dir.cmd(["verify", "--receipt", "receipts.txt"]).ok();
    std::fs::write(dir.store_file(), older).unwrap();
    for side in ["-wal", "-shm"] {
        let _ = std::fs::remove_file(format!("{}{side}", dir.store_file().display()));
    }
    dir.cmd(["verify"]).ok();
    dir.cmd(["verify", "--receipt", "receipts.txt"])
        .code(1)
        .says(&["HISTORY CUT", "commit 4 is gone"]);
}

#[test]
fn rewriting_history_from_a_receipted_commit_is_named() {
    let dir = copy_of_template("attack_rewrite");
    dir.cmd(["receipt", "-o", "receipt.txt"]).ok();
    // Another history of the same length: commit 3 cut, and another third commit signed in
    // its place (by the real signer: someone who holds only the file has no key, but a
    // receipt still tells the two histories apart).
    cut_after(&dir, 2);
    dir.cmd(["set", "samples", "RW-001", "ph", "7.3", "--why", "other"])
        .ok();
    dir.cmd(["commit", "-m", "another third commit"]).ok();
    dir.cmd(["verify"]).ok();
    dir.cmd(["verify", "--receipt", "receipt.txt"])
        .code(1)
        .says(&["HISTORY REWRITTEN", "from commit 3 or before"]);
}

#[test]
fn an_altered_receipt_fails_its_signature() {
    let dir = copy_of_template("attack_receipt_edit");
    dir.cmd(["receipt", "-o", "receipt.txt"]).ok();
    let text = String::from_utf8(dir.read("receipt.txt")).unwrap();
    dir.write("receipt.txt", &text.replace("commit: 3", "commit: 2"));
    dir.cmd(["verify", "--receipt", "receipt.txt"])
        .code(1)
        .says(&["the receipt itself was altered"]);
}

#[test]
fn receipts_are_added_automatically_after_each_commit_when_asked() {
    let dir = copy_of_template("attack_receipt_auto");
    dir.cmd(["receipt", "--keep-in", "kept.txt"]).ok();
    dir.cmd(["tag", "v1"]).ok();
    dir.cmd(["set", "samples", "RW-001", "ph", "7.3", "--why", "lab"])
        .ok();
    dir.cmd(["commit", "-m", "one more"]).ok();
    let kept = String::from_utf8(dir.read("kept.txt")).unwrap();
    let seqs: Vec<&str> = kept
        .lines()
        .filter_map(|l| l.strip_prefix("commit: "))
        .collect();
    assert_eq!(seqs, ["3", "4", "5"], "{kept}");
    dir.cmd(["verify", "--receipt", "kept.txt"])
        .ok()
        .says(&["receipt holds:"]);
    dir.cmd(["receipt", "--keep-in", "none"]).ok();
    dir.cmd(["tag", "v2"]).ok();
    let again = String::from_utf8(dir.read("kept.txt")).unwrap();
    assert_eq!(again, kept, "no receipt once stopped");
}

#[test]
fn a_planted_trigger_is_refused_before_it_can_run() {
    let dir = copy_of_template("attack_trigger");
    dir.cmd([
        "set",
        "samples",
        "RW-001",
        "ph",
        "7.1",
        "--why",
        "lab sheet",
    ])
    .ok();
    {
        let c = open_db(&dir);
        c.execute_batch(
            "CREATE TRIGGER rewrite_pending AFTER INSERT ON commit_log BEGIN
                 UPDATE store_meta SET value = 'planted' WHERE name = 'created_at';
             END;",
        )
        .unwrap();
    }
    let before = std::fs::read(dir.store_file()).unwrap();
    dir.cmd(["commit", "-m", "pH from the lab"])
        .fails(&["trigger rewrite_pending", "emend never makes it"]);
    dir.cmd(["status"]).fails(&["trigger rewrite_pending"]);
    dir.cmd(["export", "samples"])
        .fails(&["trigger rewrite_pending"]);
    assert_eq!(std::fs::read(dir.store_file()).unwrap(), before);
    dir.cmd(["verify"]).code(1).says(&[
        "NOT INTACT",
        "store file: holds trigger rewrite_pending (emend never makes it)",
    ]);
}

#[test]
fn a_view_or_a_changed_table_is_refused_too() {
    let dir = copy_of_template("attack_view");
    open_db(&dir)
        .execute_batch("CREATE VIEW shadow AS SELECT * FROM commit_log")
        .unwrap();
    dir.cmd(["log"]).fails(&["view shadow"]);
}

#[test]
fn an_edited_extract_piece_fails_the_raw_export_and_writes_nothing() {
    let dir = copy_of_template("attack_piece");
    {
        let c = open_db(&dir);
        drop_guards(&c);
        // Store the first piece uncompressed, with one byte changed.
        let (id, raw_len): (Vec<u8>, i64) = c
            .query_row(
                "SELECT c.id, c.raw_len FROM chunk c JOIN blob_chunk bc ON bc.chunk = c.id
                 JOIN extract_index e ON e.extract = bc.blob WHERE bc.idx = 0",
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .unwrap();
        let raw = crate::walkthrough::RIVER_CSV.replace("7.2", "9.2");
        assert_eq!(raw.len() as i64, raw_len);
        c.execute(
            "UPDATE chunk SET codec = 0, data = ?1 WHERE id = ?2",
            params![raw.as_bytes(), id],
        )
        .unwrap();
        restore_guards(&c);
    }
    dir.cmd(["export", "samples", "--at", "raw", "--raw", "-o", "raw.csv"])
        .fails(&["does not match its hash"]);
    assert!(!dir.path("raw.csv").exists(), "no partial output is left");
    dir.cmd(["export", "samples", "-o", "clean.csv"])
        .fails(&["does not match its hash"]);
    assert!(!dir.path("clean.csv").exists());
    dir.cmd(["show", "samples", "RW-001"])
        .fails(&["does not match its hash"]);
    dir.cmd(["verify"])
        .code(1)
        .says(&["does not match its hash"]);
}

/// Each change to a derived table, and the read commands that refuse it.
#[test]
fn edited_derived_rows_are_refused_by_every_read() {
    type Edit = &'static str;
    // Cell edits have no derived rows to forge: they are read from the signed bodies.
    let cases: [(&str, Edit, &str); 2] = [
        (
            "an excluded row brought back",
            "DELETE FROM mark WHERE kind = 'exclude'",
            "exclusion, distrust, kept-value and note index",
        ),
        (
            "a version hash replaced",
            "UPDATE version_index SET n_rows = 6 WHERE seq = 3",
            "table version index",
        ),
    ];
    let template = template();
    for (what, sql, says) in cases {
        let dir = TestDir::new("attack_derived");
        dir.copy_from(&template);
        open_db(&dir).execute_batch(sql).unwrap();
        for args in [
            &["export", "samples"][..],
            &["show", "samples", "RW-002"],
            &["why", "samples", "RW-002", "ph"],
            &["diff", "samples", "1", "3"],
            &["check", "samples"],
            &["log"],
            &["report", "samples", "-o", "r.html"],
            &["set", "samples", "RW-001", "ph", "7.0", "--why", "x"],
        ] {
            let out = dir.cmd(args).code(2);
            let err = out.stderr();
            assert!(
                err.contains("changed outside emend") && err.contains(says),
                "{what}: {args:?}: {err}"
            );
        }
        assert!(!dir.path("r.html").exists());
        dir.cmd(["verify"]).code(1);
    }
}

#[test]
fn a_retargeted_tag_is_refused() {
    let dir = copy_of_template("attack_tag");
    dir.cmd(["tag", "1", "sent"]).ok();
    open_db(&dir)
        .execute_batch("UPDATE tag SET target_seq = 3 WHERE name = 'sent'")
        .unwrap();
    dir.cmd(["export", "samples", "--at", "sent"])
        .fails(&["tag index differs"]);
    dir.cmd(["tags"]).fails(&["tag index differs"]);
}

#[test]
fn an_edited_stored_rules_file_is_refused_by_check() {
    let dir = copy_of_template("attack_rules");
    dir.write(
        "rules.toml",
        "[columns.ph]\ntype = \"decimal\"\nhard = { min = 0, max = 14 }\n",
    );
    dir.cmd(["rules", "samples", "rules.toml", "--why", "pH bounds"])
        .ok();
    {
        let c = open_db(&dir);
        drop_guards(&c);
        let text = "[columns.ph]\ntype = \"decimal\"\nhard = { min = 0, max = 99 }\n";
        let n = c
            .execute(
                "UPDATE chunk SET codec = 0, raw_len = ?1, data = ?2 WHERE id IN (
                     SELECT bc.chunk FROM blob_chunk bc JOIN blob b ON b.id = bc.blob
                     WHERE b.n_bytes = ?3)",
                params![text.len() as i64, text.as_bytes(), text.len() as i64],
            )
            .unwrap();
        assert_eq!(n, 1, "the rules file's piece");
        restore_guards(&c);
    }
    dir.cmd(["check", "samples"])
        .fails(&["does not match its hash"]);
}

#[test]
fn verify_states_the_chain_through_which_each_signer_is_trusted() {
    let dir = copy_of_template("attack_chain");
    let home2 = "home-b";
    let home3 = "home-c";
    let key = |home: &str| -> String {
        dir.cmd_as(home, ["id", "new", "--name", &format!("Signer {home}")])
            .ok();
        dir.cmd_as(home, ["id", "show", "--key"])
            .ok()
            .stdout()
            .trim()
            .to_string()
    };
    let k2 = key(home2);
    let k3 = key(home3);
    dir.cmd([
        "trust",
        &k2,
        "--name",
        "Signer home-b",
        "--why",
        "joins the team",
    ])
    .ok();
    dir.cmd_as(
        home2,
        [
            "trust",
            &k3,
            "--name",
            "Signer home-c",
            "--why",
            "her student",
        ],
    )
    .ok();
    dir.cmd_as(home3, ["tag", "3", "checked"]).ok();
    let text = dir.cmd(["verify"]).ok().stdout();
    let line = text
        .lines()
        .find(|l| l.starts_with("signer: Signer home-c"))
        .unwrap_or_else(|| panic!("{text}"));
    assert!(
        line.contains("trusted through Test Steward (a root of this store) → Signer home-b, vouched for in commit 4 → Signer home-c, vouched for in commit 5"),
        "{line}"
    );
    let j = dir.cmd(["verify", "--json"]).ok().json();
    let c = j["signers"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["name"] == "Signer home-c")
        .unwrap();
    assert_eq!(c["chain"].as_array().unwrap().len(), 3);
    let state = store_state(&dir);
    assert_eq!(state, store_state(&dir), "verify changes nothing");
}
