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
        .code(1)
        .says(&["commit 1", "untrusted key"]);
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
