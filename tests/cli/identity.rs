//! Identities, signatures and trust: who signed each commit, which keys the store trusts, and
//! how an auditor decides trust from a key file instead of the store's own list.

use crate::util::{HOME, TestDir, open_db, setup_store};
use crate::walkthrough::RIVER_CSV;

fn public_key(dir: &TestDir, home: &str) -> String {
    let v = dir.cmd_as(home, ["id", "show", "--json"]).ok().json();
    let key = v["public_key"].as_str().unwrap().to_string();
    assert_eq!(key.len(), 64);
    key
}

/// A store with commits 1-2 by the default identity and 3-4 by a second one ("second").
fn two_signers() -> TestDir {
    let dir = TestDir::new("two_signers");
    setup_store(&dir);
    crate::util::ingest_river(&dir);
    dir.cmd(["exclude", "samples", "RW-004", "--why", "duplicate"])
        .ok();
    dir.cmd(["commit", "-m", "by the steward"]).ok();
    dir.cmd_as("second", ["id", "new", "--name", "Second Analyst"])
        .ok();
    dir.cmd_as(
        "second",
        [
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
    dir.cmd_as("second", ["commit", "-m", "by the analyst"])
        .ok();
    dir.write("river2.csv", &RIVER_CSV.replace("71,", "7.1,"));
    dir.cmd_as("second", ["ingest", "river2.csv", "--table", "samples2"])
        .ok();
    dir
}

#[test]
fn id_new_and_show() {
    let dir = TestDir::new("id");
    dir.cmd(["id", "show"])
        .fails(&["no signing identity", "emend id new"]);
    dir.cmd(["id", "new", "--name", "  "])
        .fails(&["--name is empty"]);
    dir.cmd([
        "id",
        "new",
        "--name",
        "Test Steward",
        "--email",
        "t@example.org",
    ])
    .ok()
    .says(&[
        "made identity for Test Steward <t@example.org>",
        "key fingerprint",
    ]);
    let v = dir.cmd(["id", "show", "--json"]).ok().json();
    assert_eq!(v["name"], "Test Steward");
    assert_eq!(v["email"], "t@example.org");
    assert_eq!(
        v["trusted_by_store"],
        serde_json::Value::Null,
        "no store here"
    );
    let fp = v["fingerprint"].as_str().unwrap();
    assert_eq!(fp.len(), 19);
    // A second `id new` never replaces a key.
    let key = dir.read(".identity/identity.key");
    dir.cmd(["id", "new", "--name", "Someone Else"])
        .fails(&["an identity already exists"]);
    assert_eq!(dir.read(".identity/identity.key"), key);
    // The private key never enters the store.
    dir.cmd(["init"]).ok().says(&["trusts Test Steward"]);
    let seed = String::from_utf8(key).unwrap();
    let store = std::fs::read(dir.store_file()).unwrap();
    let seed_bytes: Vec<u8> = (0..32)
        .map(|i| u8::from_str_radix(&seed.trim()[2 * i..2 * i + 2], 16).unwrap())
        .collect();
    assert!(!store.windows(32).any(|w| w == &seed_bytes[..]));
    assert!(!store.windows(64).any(|w| w == seed.trim().as_bytes()));
    let v = dir.cmd(["id", "show", "--json"]).ok().json();
    assert_eq!(v["trusted_by_store"], true);
    let text = dir.cmd(["id", "show"]).ok().stdout();
    assert!(
        text.contains(fp) && text.contains("trusts this key"),
        "{text}"
    );
}

#[test]
fn a_key_file_that_does_not_match_its_identity_is_refused() {
    let dir = TestDir::new("id_mismatch");
    setup_store(&dir);
    dir.cmd_as("second", ["id", "new", "--name", "Other"]).ok();
    std::fs::copy(
        dir.path("second/identity.key"),
        dir.path(&format!("{HOME}/identity.key")),
    )
    .unwrap();
    dir.cmd(["id", "show"]).fails(&["do not belong together"]);
}

#[test]
fn commits_by_an_untrusted_key_fail_verify_until_trusted_by_a_key_file() {
    let dir = two_signers();
    let first = public_key(&dir, HOME);
    let second = public_key(&dir, "second");
    assert_ne!(first, second);

    // The first signer to commit became trusted; the second is not.
    let log = dir.cmd(["log", "--json"]).ok().json();
    let trusted: Vec<bool> = log["commits"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["author"]["trusted"].as_bool().unwrap())
        .collect();
    assert_eq!(trusted, [true, true, false, false]);
    assert_eq!(log["commits"][2]["author"]["name"], "Second Analyst");
    assert_eq!(log["commits"][2]["author"]["key"], second.as_str());
    let text = dir.cmd(["log"]).ok().stdout();
    assert_eq!(text.matches("(untrusted key)").count(), 2, "{text}");

    // Untrusted is not altered: its own list and its own exit code (3).
    let v = dir.cmd(["verify", "--json"]).code(3).json();
    assert_eq!(v["trust"], "store");
    assert_eq!(v["intact"], true);
    assert_eq!(v["trusted"], false);
    assert!(v["problems"].as_array().unwrap().is_empty(), "{v:#}");
    let problems = v["untrusted"].as_array().unwrap();
    assert_eq!(problems.len(), 2, "{v:#}");
    for (p, seq) in problems.iter().zip([3, 4]) {
        assert_eq!(p["object"], format!("commit {seq}"));
        let what = p["problem"].as_str().unwrap();
        assert!(what.contains("does not trust at that commit"), "{what}");
        assert!(what.contains("Second Analyst"), "{what}");
    }
    dir.cmd(["verify"]).code(3).says(&[
        "intact:",
        "untrusted signers: 2 commits are",
        "commit 3: signed by key",
    ]);

    // An auditor's key file with both keys: everything checks out.
    dir.write(
        "auditor_keys.txt",
        &format!(
            "# keys the auditor trusts\n{first}  Test Steward\n\n{}\n",
            second.to_uppercase()
        ),
    );
    let v = dir
        .cmd(["verify", "--json", "--trust", "auditor_keys.txt"])
        .ok()
        .json();
    assert_eq!(v["intact"], true);
    assert_eq!(v["trust"], "file");

    // Only the second key: now the first signer's commits are the untrusted ones.
    dir.write("second_only.txt", &format!("{second}\n"));
    let v = dir
        .cmd(["verify", "--json", "--trust", "second_only.txt"])
        .code(3)
        .json();
    let objects: Vec<&str> = v["untrusted"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["object"].as_str().unwrap())
        .collect();
    assert_eq!(objects, ["commit 1", "commit 2"]);
    assert!(
        v["untrusted"][0]["problem"]
            .as_str()
            .unwrap()
            .contains("Test Steward")
    );

    // Bad key files are usage errors.
    dir.write("bad_keys.txt", "not-a-key\n");
    dir.cmd(["verify", "--trust", "bad_keys.txt"])
        .fails(&["bad_keys.txt:1", "64 hex digits"]);
    dir.write("no_keys.txt", "# nothing\n");
    dir.cmd(["verify", "--trust", "no_keys.txt"])
        .fails(&["lists no public keys"]);
    dir.cmd(["verify", "--trust", "missing.txt"])
        .fails(&["missing.txt"]);
}

#[test]
fn a_commit_re_signed_by_a_key_added_to_the_store_is_caught_by_an_auditor_key_file() {
    // An insider rewrites commit 3 (a fix's value), signs it with their own key, and adds that
    // key to the store's signer list. The store's own trust list now vouches for it; only an
    // outside list of keys reveals it.
    use ed25519_dalek::Signer as _;
    let dir = TestDir::new("resign");
    setup_store(&dir);
    crate::util::ingest_river(&dir);
    dir.cmd([
        "set",
        "samples",
        "RW-002",
        "ph",
        "7.1",
        "--why",
        "lab sheet",
    ])
    .ok();
    dir.cmd(["commit", "-m", "fix"]).ok();
    let honest = public_key(&dir, HOME);
    dir.cmd_as("insider", ["id", "new", "--name", "Test Steward"])
        .ok();
    let seed_hex = String::from_utf8(dir.read("insider/identity.key")).unwrap();
    let seed: [u8; 32] = (0..32)
        .map(|i| u8::from_str_radix(&seed_hex.trim()[2 * i..2 * i + 2], 16).unwrap())
        .collect::<Vec<u8>>()
        .try_into()
        .unwrap();
    let key = ed25519_dalek::SigningKey::from_bytes(&seed);
    let insider_pub = key.verifying_key().to_bytes();
    {
        let c = open_db(&dir);
        c.execute_batch("DROP TRIGGER commit_no_update").unwrap();
        let mut body: Vec<u8> = c
            .query_row("SELECT body FROM commit_log WHERE seq = 2", [], |r| {
                r.get(0)
            })
            .unwrap();
        let honest_bytes: Vec<u8> = (0..32)
            .map(|i| u8::from_str_radix(&honest[2 * i..2 * i + 2], 16).unwrap())
            .collect();
        let at = body
            .windows(32)
            .position(|w| w == &honest_bytes[..])
            .expect("author key in body");
        body[at..at + 32].copy_from_slice(&insider_pub);
        let id = blake3::hash(&body);
        let sig = key.sign(id.as_bytes()).to_bytes();
        c.execute(
            "UPDATE commit_log SET body = ?1, id = ?2, signature = ?3 WHERE seq = 2",
            rusqlite::params![body, &id.as_bytes()[..], &sig[..]],
        )
        .unwrap();
        c.execute(
            "INSERT INTO signer (key, name, email, added_at) VALUES (?1, 'Test Steward', NULL, ?2)",
            rusqlite::params![&insider_pub[..], crate::util::NOW],
        )
        .unwrap();
        // A careful insider puts the guard back exactly as emend makes it.
        c.execute_batch(
            "CREATE TRIGGER commit_no_update BEFORE UPDATE ON commit_log
BEGIN SELECT RAISE(ABORT, 'commits are immutable'); END;",
        )
        .unwrap();
    }
    // The store's list now trusts the insider: verify (store trust) passes.
    dir.cmd(["verify"]).ok();
    dir.write("keys.txt", &format!("{honest}\n"));
    let v = dir
        .cmd(["verify", "--json", "--trust", "keys.txt"])
        .code(3)
        .json();
    assert_eq!(v["untrusted"][0]["object"], "commit 2", "{v:#}");
    assert!(
        v["untrusted"][0]["problem"]
            .as_str()
            .unwrap()
            .contains("this list of keys does not trust")
    );
}

#[test]
fn init_with_an_identity_trusts_it_at_once() {
    let dir = TestDir::new("init_trust");
    dir.cmd(["id", "new", "--name", "Test Steward"]).ok();
    dir.cmd(["init"]).ok().says(&["trusts Test Steward"]);
    // A second identity that commits first is then not trusted.
    dir.write("river.csv", RIVER_CSV);
    dir.cmd_as("second", ["id", "new", "--name", "Second Analyst"])
        .ok();
    dir.cmd_as("second", ["ingest", "river.csv", "--table", "samples"])
        .ok();
    dir.cmd(["verify"]).code(3).says(&[
        "untrusted signers",
        "commit 1: signed by key",
        "emend trust KEY",
    ]);
}
