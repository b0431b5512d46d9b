//! `emend demo DIR`: builds a store from the bundled (fictional) extract that verifies.

use crate::util::TestDir;

#[test]
fn demo_builds_a_store_that_verifies() {
    let dir = TestDir::new("demo");
    let out = dir.cmd(["demo", "demo"]).ok();
    let text = out.stdout();
    assert!(text.contains("demo store built"), "{text}");
    assert!(text.contains("2,000 rows"), "{text}");
    assert!(dir.path("demo/.emend/store.sqlite").is_file());
    // Run the next steps it suggests, from inside the demo folder.
    let run = |args: &[&str]| dir.run(dir.command_in("demo", ".identity", args));
    let v = run(&["verify", "--json"]).ok().json();
    assert_eq!(v["intact"], true, "{v:#}");
    assert_eq!(
        v["checked"]["commits"], 4,
        "ingest, rules and two cleaning commits"
    );
    // The bundled rules: the raw extract breaks them, the cleaned version passes.
    run(&["check", "samples", "--at", "raw"]).code(1);
    run(&["check", "samples"]).ok().says(&["passes"]);
    let raw = run(&["export", "samples", "--at", "raw", "--raw"]).ok();
    assert_eq!(raw.stdout_bytes(), &dir.read("demo/field_samples.csv")[..]);
    let log = run(&["log", "--json"]).ok().json();
    let commits = log["commits"].as_array().unwrap();
    assert_eq!(commits.len(), 4);
    assert!(commits.iter().all(|c| c["author"]["trusted"] == true));
    // The lab-sheet evidence is attached to the pH fix.
    let fixes = commits[3]["fixes"].as_array().unwrap();
    let ph = fixes
        .iter()
        .find(|f| f["row"] == "S-00412")
        .expect("the S-00412 fix");
    assert_eq!(ph["value"], "7.1");
    assert_eq!(ph["evidence"][0]["name"], "lab_sheet_S-00412.txt");
    let show = run(&[
        "show",
        "samples",
        "--rows",
        "412",
        "--cols",
        "sample_id,ph",
        "--json",
    ])
    .ok()
    .json();
    assert_eq!(
        show["rows"][0]["cells"],
        serde_json::json!(["S-00412", "7.1"])
    );
}

#[test]
fn demo_refuses_a_folder_that_is_not_empty() {
    let dir = TestDir::new("demo_busy");
    dir.write("busy/notes.txt", "keep me\n");
    dir.cmd(["demo", "busy"]).fails(&["is not empty"]);
    assert_eq!(dir.read("busy/notes.txt"), b"keep me\n");
    assert!(!dir.path("busy/.emend").exists());
    // An empty existing folder is fine.
    std::fs::create_dir(dir.path("empty")).unwrap();
    dir.cmd(["demo", "empty"]).ok();
}

#[test]
fn the_demo_followed_by_its_own_advice_leaves_a_store_its_user_commits_to() {
    // Without an identity yet: the demo prints the two commands that make one and have the
    // demo steward vouch for it; run them as written, then fix, commit and verify.
    let dir = TestDir::new("demo_advice");
    let text = dir.cmd(["demo", "demo"]).ok().stdout();
    assert!(text.contains("emend id new --name"), "{text}");
    assert!(
        text.contains("EMEND_HOME=.demo-identity emend trust"),
        "{text}"
    );
    let you = |args: &[&str]| dir.run(dir.command_in("demo", ".you", args));
    you(&["id", "new", "--name", "New Analyst"]).ok();
    let key = you(&["id", "show", "--key"])
        .ok()
        .stdout()
        .trim()
        .to_string();
    assert_eq!(key.len(), 64, "{key}");
    dir.run(dir.command_in(
        "demo",
        "demo/.demo-identity",
        [
            "trust",
            &key,
            "--name",
            "New Analyst",
            "--why",
            "my own key",
        ],
    ))
    .ok();
    you(&[
        "set",
        "samples",
        "S-00003",
        "notes",
        "cattle upstream",
        "--why",
        "x",
    ])
    .ok();
    let commit = you(&["commit", "-m", "my first fix"]).ok().stdout();
    assert!(!commit.contains("does not trust"), "{commit}");
    you(&["verify"]).ok().says(&["intact"]);

    // With an identity already made: the demo vouches for it itself.
    let dir = TestDir::new("demo_trusts_you");
    dir.cmd(["id", "new", "--name", "New Analyst"]).ok();
    dir.cmd(["demo", "demo"])
        .ok()
        .says(&["the demo steward trusts your key (New Analyst)"]);
    let run = |args: &[&str]| dir.run(dir.command_in("demo", ".identity", args));
    run(&[
        "set",
        "samples",
        "S-00003",
        "notes",
        "cattle upstream",
        "--why",
        "x",
    ])
    .ok();
    run(&["commit", "-m", "my first fix"]).ok();
    let v = run(&["verify", "--json"]).ok().json();
    assert_eq!(v["trusted"], true, "{v:#}");

    // Without that step, the commit says so and verify gives its own exit code, 3.
    let dir = TestDir::new("demo_untrusted");
    dir.cmd(["demo", "demo"]).ok();
    let you = |args: &[&str]| dir.run(dir.command_in("demo", ".you", args));
    you(&["id", "new", "--name", "New Analyst"]).ok();
    you(&[
        "set",
        "samples",
        "S-00003",
        "notes",
        "cattle upstream",
        "--why",
        "x",
    ])
    .ok();
    you(&["commit", "-m", "my first fix"])
        .ok()
        .says(&["this store does not trust your key", "emend trust"]);
    you(&["verify"])
        .code(3)
        .says(&["intact:", "untrusted signers"]);
}
