//! Issue 8: key rotation. A new identity is trusted by a commit signed with the old one, and an
//! auditor's key list that holds only the old key reaches the new one through that commit.

use crate::util::{TestDir, setup_store};

#[test]
fn a_rotated_key_is_trusted_through_a_signed_commit() {
    let dir = TestDir::new("keys_rotation");
    setup_store(&dir);
    dir.write("s.csv", "id,v\nA,1\nB,2\n");
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok();
    let old = dir.cmd(["id", "show", "--json"]).ok().json()["public_key"]
        .as_str()
        .unwrap()
        .to_string();
    dir.cmd_as(".new", ["id", "new", "--name", "Test Steward (new laptop)"])
        .ok();
    let new = dir.cmd_as(".new", ["id", "show", "--json"]).ok().json()["public_key"]
        .as_str()
        .unwrap()
        .to_string();
    // Before rotation, the new key's commits are untrusted.
    dir.cmd_as(".new", ["trust", &new, "--name", "me", "--why", "self"])
        .code(2)
        .fails(&["not trusted by this store"]);
    dir.cmd([
        "trust",
        &new,
        "--name",
        "Test Steward (new laptop)",
        "--why",
        "",
    ])
    .code(2)
    .fails(&["--why is empty"]);
    dir.cmd(["trust", "abc", "--name", "x", "--why", "y"])
        .code(2)
        .fails(&["64 hex digits"]);
    dir.cmd([
        "trust",
        &new,
        "--name",
        "Test Steward (new laptop)",
        "--why",
        "key rotation: replaces the old laptop key",
    ])
    .ok();
    dir.cmd_as(".new", ["set", "s", "A", "v", "10", "--why", "typo"])
        .ok();
    dir.cmd_as(".new", ["commit", "-m", "fix with the new key"])
        .ok();
    dir.cmd(["verify"]).ok();
    // The auditor knows only the old key: the new one is reached through the signed commit.
    dir.write(
        "keys.txt",
        &format!("{old}  # the steward's original key\n"),
    );
    dir.cmd(["verify", "--trust", "keys.txt"]).ok();
    // A key vouched for by nobody the auditor trusts stays untrusted.
    dir.write("other.txt", &format!("{new}\n"));
    dir.cmd(["verify", "--trust", "other.txt"])
        .code(3)
        .says(&["commit 1", "does not trust at that commit"]);
    let log = dir.cmd(["log", "--json"]).ok().json();
    let kinds: Vec<&str> = log["commits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["kind"].as_str().unwrap())
        .collect();
    assert_eq!(kinds, ["ingest", "trust", "fixes"]);
    assert_eq!(log["commits"][1]["trust"]["key"], new.as_str());
}

/// Issue 15: trust given by `trust` counts from the commit after it, not backwards; a trusted
/// signer can withdraw it from a given commit on, and an auditor's key list follows both. A
/// commit dated before its parent is named as a warning.
#[test]
fn trust_is_not_given_backwards_and_can_be_withdrawn_from_a_commit_on() {
    let dir = TestDir::new("keys_revoke");
    setup_store(&dir);
    dir.write("s.csv", "id,v\nA,1\nB,2\nC,3\n");
    dir.cmd(["ingest", "s.csv", "--table", "s", "--key", "id"])
        .ok(); // 1
    let root = dir
        .cmd(["id", "show", "--key"])
        .ok()
        .stdout()
        .trim()
        .to_string();
    dir.cmd_as(".b", ["id", "new", "--name", "Colleague"]).ok();
    let b = dir
        .cmd_as(".b", ["id", "show", "--key"])
        .ok()
        .stdout()
        .trim()
        .to_string();
    let fix_as = |row: &str| {
        dir.cmd_as(".b", ["set", "s", row, "v", "9", "--why", "x"])
            .ok();
        dir.cmd_as(".b", ["commit", "-m", "colleague's fix"])
    };
    fix_as("A")
        .ok()
        .says(&["this store does not trust your key"]); // 2
    dir.cmd([
        "trust",
        &b,
        "--name",
        "Colleague",
        "--why",
        "joins the team",
    ])
    .ok()
    .says(&["its commits after this one verify as trusted"]); // 3
    let later = fix_as("B").ok().stdout(); // 4
    assert!(!later.contains("does not trust"), "{later}");
    let untrusted = |args: &[&str]| -> Vec<String> {
        let v = dir.run(dir.command(args)).json();
        v["untrusted"]
            .as_array()
            .unwrap()
            .iter()
            .map(|p| p["object"].as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(untrusted(&["verify", "--json"]), ["commit 2"]);
    dir.write("keys.txt", &format!("{root}\n"));
    assert_eq!(
        untrusted(&["verify", "--json", "--trust", "keys.txt"]),
        ["commit 2"]
    );
    let log = dir.cmd(["log", "--json"]).ok().json();
    let trusted: Vec<bool> = log["commits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["author"]["trusted"].as_bool().unwrap())
        .collect();
    assert_eq!(trusted, [true, false, true, true]);

    // The colleague's laptop went missing after commit 3: withdraw trust from commit 4 on.
    dir.cmd(["trust", &b, "--revoke", "--from", "9", "--why", "x"])
        .fails(&["--from 9"]);
    dir.cmd_as(".c", ["id", "new", "--name", "Stranger"]).ok();
    dir.cmd_as(".c", ["trust", &root, "--revoke", "--why", "takeover"])
        .fails(&["not trusted by this store"]);
    dir.cmd([
        "trust",
        &b,
        "--revoke",
        "--from",
        "4",
        "--why",
        "laptop lost on 2 Dec",
    ])
    .ok()
    .says(&["its commits from 4 on verify as untrusted"]); // 5
    assert_eq!(untrusted(&["verify", "--json"]), ["commit 2", "commit 4"]);
    assert_eq!(
        untrusted(&["verify", "--json", "--trust", "keys.txt"]),
        ["commit 2", "commit 4"]
    );
    dir.cmd(["trust", &b, "--name", "Colleague", "--why", "found it"])
        .fails(&["trust was withdrawn from that key"]);

    // A commit dated before its parent: a warning, not a failure.
    let mut c = dir.command(["tag", "1", "v1", "--note", "first"]);
    c.env("EMEND_NOW", "2026-09-01T09:00:00Z");
    dir.run(c).ok();
    dir.cmd(["verify"])
        .code(3)
        .says(&["warning: commit 6: dated 2026-09-01T09:00:00Z, before its parent"]);
}
