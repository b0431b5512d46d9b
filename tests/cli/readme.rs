//! The README's walk-through runs as written: every `emend` line of its shell blocks, in
//! order, in a copy of the shipped `demo/` folder, each exiting as its comment says (1 where
//! the comment says "exits 1", else 0). Then the results it promises are checked.

use crate::util::{HOME, TestDir};
use std::path::Path;

/// Splits one shell line into words: single quotes are literal, double quotes allow `\"` and
/// `\\`, an unquoted `#` starting a word begins a comment. Returns the words and the comment.
fn words(line: &str) -> (Vec<String>, String) {
    let mut out = Vec::new();
    let mut word = String::new();
    let mut in_word = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\'' => {
                in_word = true;
                for q in chars.by_ref() {
                    if q == '\'' {
                        break;
                    }
                    word.push(q);
                }
            }
            '"' => {
                in_word = true;
                while let Some(q) = chars.next() {
                    match q {
                        '"' => break,
                        '\\' if matches!(chars.peek(), Some('"' | '\\')) => {
                            word.push(chars.next().unwrap())
                        }
                        _ => word.push(q),
                    }
                }
            }
            '#' if !in_word => return (out, chars.collect()),
            c if c.is_whitespace() => {
                if in_word {
                    out.push(std::mem::take(&mut word));
                    in_word = false;
                }
            }
            c => {
                in_word = true;
                word.push(c);
            }
        }
    }
    if in_word {
        out.push(word);
    }
    (out, String::new())
}

/// The shell lines of the README's walk-through, continuation lines joined.
fn walkthrough_lines(readme: &str) -> Vec<String> {
    let start = readme
        .find("\n## Walk-through")
        .expect("a walk-through section");
    let rest = &readme[start + 1..];
    let section = &rest[..rest[3..].find("\n## ").map_or(rest.len(), |e| e + 3)];
    let mut lines = Vec::new();
    let mut in_block = false;
    let mut pending = String::new();
    for line in section.lines() {
        if line.starts_with("```") {
            in_block = line.trim() == "```sh";
            continue;
        }
        if !in_block || line.trim().is_empty() {
            continue;
        }
        match line.strip_suffix('\\') {
            Some(part) => pending.push_str(part),
            None => {
                pending.push_str(line);
                lines.push(std::mem::take(&mut pending));
            }
        }
    }
    lines
}

fn copy_demo(to: &Path) {
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo");
    for entry in std::fs::read_dir(&demo).expect("demo folder") {
        let entry = entry.unwrap();
        std::fs::copy(entry.path(), to.join(entry.file_name())).unwrap();
    }
}

#[test]
fn the_shell_lexer_reads_quotes_comments_and_redirects() {
    let (w, comment) =
        words(r#"emend note s ph --rows '#412' --why "a \"quoted\" reason"  # flag"#);
    assert_eq!(
        w,
        [
            "emend",
            "note",
            "s",
            "ph",
            "--rows",
            "#412",
            "--why",
            r#"a "quoted" reason"#
        ]
    );
    assert_eq!(comment.trim(), "flag");
    let (w, _) = words("emend diff s 3 4 --csv > changes.csv");
    assert_eq!(w[w.len() - 2..], [">", "changes.csv"]);
}

#[test]
fn the_readme_walkthrough_runs_as_written() {
    let readme = std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md"))
        .expect("README.md");
    let dir = TestDir::new("readme");
    copy_demo(dir.root());
    let lines = walkthrough_lines(&readme);
    assert!(
        lines.len() > 40,
        "the walk-through has its commands: {lines:?}"
    );
    let mut ran = 0;
    for line in &lines {
        let (mut w, comment) = words(line);
        if w.first().map(String::as_str) == Some("cp") {
            continue; // the copy of demo/ made above
        }
        assert_eq!(w[0], "emend", "every walk-through line runs emend: {line}");
        let redirect = match w.iter().position(|a| a == ">") {
            Some(i) => {
                let file = w[i + 1].clone();
                w.truncate(i);
                Some(file)
            }
            None => None,
        };
        let expected = if comment.contains("exits 1") { 1 } else { 0 };
        let out = dir.run(dir.command_in(".", HOME, &w[1..]));
        let out = if expected == 0 {
            out.ok()
        } else {
            out.code(expected)
        };
        if let Some(file) = redirect {
            dir.write_bytes(&file, out.stdout_bytes());
        }
        ran += 1;
    }
    assert_eq!(ran, lines.len() - 1);

    // What the walk-through promises.
    assert_eq!(dir.read("check.csv"), dir.read("field_samples.csv"));
    assert_eq!(
        dir.read("lab_sheet_copy.txt"),
        dir.read("lab_sheet_S-00412.txt")
    );
    let changes = String::from_utf8(dir.read("changes.csv")).unwrap();
    assert!(changes.contains("S-01195"), "{changes}");
    let report = String::from_utf8(dir.read("october.html")).unwrap();
    assert!(report.contains("the programme scientist"));
    let v = dir
        .run(dir.command_in(".", HOME, ["verify", "--json"]))
        .ok()
        .json();
    assert_eq!(v["intact"], true, "{v:#}");
    let show = dir
        .run(dir.command_in(
            ".",
            HOME,
            [
                "show",
                "samples",
                "S-02050",
                "--cols",
                "ph,sampled_on",
                "--json",
            ],
        ))
        .ok()
        .json();
    assert_eq!(
        show["rows"][0]["cells"],
        serde_json::json!(["6.8", "2025-11-25"])
    );
}
