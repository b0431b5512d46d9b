//! Issue 16, the output side: what whoever holds the store (or wrote the extract) can make
//! emend print or write. Each test is named after the attack it stops.

use crate::util::{TestDir, setup_store};
use std::io::Read;

/// The forged text: ECMA-48 CSI "erase line" (`ESC [ 2 K`), a carriage return, then a verdict,
/// so that a terminal would show "intact" where the real text was.
const FORGED: &str = "\u{1b}[2K\rintact";

/// A store whose signer name, commit message, reason and one cell hold [`FORGED`].
fn forged_store(name: &str) -> TestDir {
    let dir = TestDir::new(name);
    dir.cmd(["init"]).ok();
    dir.cmd([
        "id",
        "new",
        "--name",
        &format!("Mallory{FORGED}"),
        "--email",
        "m@example.org",
    ])
    .ok();
    dir.write(
        "raw.csv",
        &format!("site_id,site,ph\nA1,\"Mill{FORGED}\",7.1\nA2,Heron Pool,6.8\n"),
    );
    dir.cmd(["ingest", "raw.csv", "--table", "sites", "--key", "site_id"])
        .ok();
    dir.cmd([
        "set",
        "sites",
        "A2",
        "ph",
        "6.9",
        "--why",
        &format!("meter{FORGED}"),
    ])
    .ok();
    dir.cmd(["commit", "-m", &format!("fixes{FORGED}")]).ok();
    dir
}

/// Text for people never holds ESC or CR, and shows the escape instead.
fn escaped(what: &str, text: &str) {
    assert!(
        !text.contains('\u{1b}') && !text.contains('\r'),
        "{what} printed a raw control character:\n{text:?}"
    );
}

#[test]
fn a_signer_name_reason_or_cell_cannot_repaint_the_terminal() {
    let dir = forged_store("repaint");
    // The formatting path the terminal gets is the same function as the pipe's (out::stdout
    // wraps both); its terminal-only part is unit-tested in src/cli/out.rs.
    for args in [
        vec!["verify"],
        vec!["log"],
        vec!["why", "sites", "A2", "ph"],
        vec!["why", "sites", "A1"],
        vec!["show", "sites"],
        vec!["diff", "sites", "raw", "latest"],
        vec!["status"],
        vec!["tags"],
        vec!["profile", "sites"],
        vec!["check", "sites"],
        vec!["id", "show"],
    ] {
        let out = dir.run(dir.command(&args));
        escaped(&args.join(" "), &out.stdout());
        escaped(&args.join(" "), &out.stderr());
    }
    // The places that show the name, the reason and the cell show them escaped.
    let log = dir.cmd(["log"]).ok().stdout();
    assert!(log.contains("Mallory\\u{1b}[2K\\u{d}intact"), "{log}");
    let why = dir.cmd(["why", "sites", "A2", "ph"]).ok().stdout();
    assert!(why.contains("meter\\u{1b}[2K\\u{d}intact"), "{why}");
    let show = dir.cmd(["show", "sites"]).ok().stdout();
    assert!(show.contains("Mill\\u{1b}[2K"), "{show}");
    // An error that quotes a value typed or stored.
    let err = dir
        .cmd(["show", "sites", "--at", &format!("v{FORGED}")])
        .code(2)
        .stderr();
    escaped("an error", &err);
    assert!(err.contains("\\u{1b}[2K"), "{err}");
}

#[test]
fn piped_csv_keeps_the_exact_bytes_of_a_forged_value() {
    let dir = forged_store("exact_bytes");
    // export: RFC 4180 quotes the field, as it holds a carriage return (§2 rule 6).
    let csv = dir.cmd(["export", "sites"]).ok().stdout();
    assert!(csv.contains(&format!("\"Mill{FORGED}\"")), "{csv:?}");
    let csv = dir.cmd(["export", "sites", "-o", "-"]).ok().stdout();
    assert!(csv.contains(&format!("\"Mill{FORGED}\"")), "{csv:?}");
    // diff --csv used to go through the styled stream, which stripped escape sequences from
    // values when piped.
    let diff = dir
        .cmd(["diff", "sites", "raw", "latest", "--csv"])
        .ok()
        .stdout();
    assert!(diff.contains(&format!("meter{FORGED}")), "{diff:?}");
    // JSON escapes control characters itself (RFC 8259 §7) and keeps the value exactly.
    let json = dir.cmd(["show", "sites", "--json"]).ok().json();
    assert_eq!(json["rows"][0]["cells"][1], format!("Mill{FORGED}"));
    // The decisions file keeps the reason's bytes.
    dir.cmd(["export", "sites", "-o", "out.csv", "--decisions", "d.csv"])
        .ok();
    let decisions = String::from_utf8(dir.read("d.csv")).unwrap();
    assert!(
        decisions.contains(&format!("meter{FORGED}")),
        "{decisions:?}"
    );
}

#[test]
fn spreadsheet_formulas_in_an_export_are_counted_and_defused_on_request() {
    // Source: OWASP, "CSV Injection" (from memory): cells beginning with =, +, -, @, tab or
    // carriage return may run as formulas; a leading single quote defuses them.
    let dir = TestDir::new("formulas");
    setup_store(&dir);
    dir.write(
        "raw.csv",
        "id,a,b\n1,\"=HYPERLINK(\"\"http://example.org\"\")\",-3.2\n2,@SUM(A1:A2),+7\n3,+1+2,\"\tx\"\n4,-x,plain\n",
    );
    dir.cmd(["ingest", "raw.csv", "--table", "t", "--key", "id"])
        .ok();
    dir.cmd(["set", "t", "4", "b", "=1+1", "--why", "=cmd|' /C calc'!A0"])
        .ok();
    dir.cmd(["commit", "-m", "one fix"]).ok();
    // Without the option: the exact data, and a warning that counts the formula-like cells
    // (=HYPERLINK, @SUM, +1+2, tab x, -x, =1+1; not -3.2 or +7, which are numbers).
    let plain = dir.cmd(["export", "t"]).ok();
    assert!(
        plain
            .stdout()
            .contains("=HYPERLINK(\"\"http://example.org\"\")")
    );
    assert!(plain.stdout().contains(",-3.2\n"), "{}", plain.stdout());
    let warning = plain.stderr();
    assert!(
        warning.contains("6 cells") && warning.contains("--spreadsheet-safe"),
        "{warning}"
    );
    // With it: each of those cells gains one apostrophe, numbers stay as they are.
    let safe = dir
        .cmd([
            "export",
            "t",
            "--spreadsheet-safe",
            "-o",
            "safe.csv",
            "--decisions",
            "d.csv",
        ])
        .ok();
    let text = String::from_utf8(dir.read("safe.csv")).unwrap();
    let rows = crate::util::parse_csv(&text, ',');
    assert_eq!(
        rows[1],
        ["1", "'=HYPERLINK(\"http://example.org\")", "-3.2"]
    );
    assert_eq!(rows[2], ["2", "'@SUM(A1:A2)", "+7"]);
    assert_eq!(rows[3], ["3", "'+1+2", "'\tx"]);
    assert_eq!(rows[4], ["4", "'-x", "'=1+1"]);
    let decisions = String::from_utf8(dir.read("d.csv")).unwrap();
    assert!(decisions.contains(",'=1+1,"), "{decisions}");
    assert!(decisions.contains("'=cmd|' /C calc'!A0"), "{decisions}");
    assert!(
        safe.stderr().contains("leading apostrophe"),
        "{}",
        safe.stderr()
    );
    // diff --csv has the option too.
    let diff = dir
        .cmd(["diff", "t", "raw", "latest", "--csv", "--spreadsheet-safe"])
        .ok()
        .stdout();
    assert!(diff.contains(",'=1+1,"), "{diff}");
    // A clean table gives no warning.
    let dir2 = TestDir::new("formulas_none");
    setup_store(&dir2);
    dir2.write("raw.csv", "id,v\n1,-3.2\n2,x\n");
    dir2.cmd(["ingest", "raw.csv", "--table", "t", "--key", "id"])
        .ok();
    assert!(!dir2.cmd(["export", "t"]).ok().stderr().contains("formula"));
}

/// A store with a small table, for the file tests.
fn small_store(name: &str) -> TestDir {
    let dir = TestDir::new(name);
    setup_store(&dir);
    dir.write("raw.csv", "id,v\n1,a\n2,b\n");
    dir.cmd(["ingest", "raw.csv", "--table", "t", "--key", "id"])
        .ok();
    dir
}

#[cfg(unix)]
#[test]
fn a_symlink_planted_at_the_temporary_name_is_never_followed() {
    let dir = small_store("planted_symlink");
    dir.write("victim.txt", "precious\n");
    // The old temporary name was `.NAME.emend-PID.tmp`: plant a link at every PID the next
    // command can get (PIDs are handed out upwards from ours, and wrap at pid_max).
    let me = std::process::id();
    for pid in me..me + 3000 {
        std::os::unix::fs::symlink(
            dir.path("victim.txt"),
            dir.path(&format!(".out.csv.emend-{pid}.tmp")),
        )
        .unwrap();
    }
    dir.cmd(["export", "t", "-o", "out.csv"]).ok();
    assert_eq!(dir.read("victim.txt"), b"precious\n");
    assert_eq!(dir.read("out.csv"), b"id,v\n1,a\n2,b\n");
    let planted = std::fs::symlink_metadata(dir.path(&format!(".out.csv.emend-{me}.tmp"))).unwrap();
    assert!(planted.file_type().is_symlink());
    // A link at the target itself is replaced by the file; what it pointed to is untouched.
    std::os::unix::fs::symlink(dir.path("victim.txt"), dir.path("linked.csv")).unwrap();
    dir.cmd(["export", "t", "-o", "linked.csv"]).ok();
    assert_eq!(dir.read("victim.txt"), b"precious\n");
    let m = std::fs::symlink_metadata(dir.path("linked.csv")).unwrap();
    assert!(m.file_type().is_file(), "the link was replaced by a file");
    assert_eq!(dir.read("linked.csv"), b"id,v\n1,a\n2,b\n");
    // No temporary file is left behind.
    let left: Vec<String> = std::fs::read_dir(dir.root())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".tmp") && !n.starts_with(".out.csv.emend-"))
        .collect();
    assert!(left.is_empty(), "{left:?}");
}

#[cfg(unix)]
#[test]
fn export_to_dev_null_leaves_it_a_character_device() {
    use std::os::unix::fs::FileTypeExt;
    let dir = small_store("dev_null");
    dir.cmd(["export", "t", "-o", "/dev/null"]).ok();
    dir.cmd(["report", "t", "-o", "/dev/null"]).ok();
    assert!(
        std::fs::metadata("/dev/null")
            .unwrap()
            .file_type()
            .is_char_device()
    );
}

#[cfg(unix)]
#[test]
fn export_to_a_fifo_is_written_in_place_for_its_reader() {
    use std::os::unix::fs::FileTypeExt;
    let dir = small_store("fifo");
    let fifo = dir.path("pipe");
    let made = std::process::Command::new("mkfifo")
        .arg(&fifo)
        .status()
        .expect("mkfifo (coreutils) runs");
    assert!(made.success());
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || {
            let mut got = Vec::new();
            std::fs::File::open(&fifo)
                .unwrap()
                .read_to_end(&mut got)
                .unwrap();
            got
        })
    };
    dir.cmd(["export", "t", "-o", "pipe"]).ok();
    assert_eq!(reader.join().unwrap(), b"id,v\n1,a\n2,b\n");
    assert!(
        std::fs::symlink_metadata(&fifo)
            .unwrap()
            .file_type()
            .is_fifo()
    );
}

#[test]
fn a_store_named_by_emend_store_is_used_from_any_folder() {
    let dir = small_store("emend_store");
    // Another folder, outside the project: walking up from it finds no store.
    let other = TestDir::new("emend_store_elsewhere");
    let store = dir.store_file();
    let run = |args: &[&str], named: Option<&std::path::Path>| {
        let mut c = other.command(args);
        c.env("EMEND_HOME", dir.path(crate::util::HOME));
        if let Some(p) = named {
            c.env("EMEND_STORE", p);
        }
        other.run(c)
    };
    assert_eq!(
        run(&["export", "t"], Some(&store)).ok().stdout(),
        "id,v\n1,a\n2,b\n"
    );
    // The project folder works as well as the file, and a write goes to that store.
    run(
        &["set", "t", "1", "v", "z", "--why", "typo"],
        Some(dir.root()),
    )
    .ok();
    run(&["status"], Some(dir.root())).ok().says(&["typo"]);
    dir.cmd(["status"]).ok().says(&["typo"]);
    // Without it, that folder has no store.
    run(&["tables"], None).fails(&["no emend store"]);
    // A name that holds no store says so.
    run(
        &["tables"],
        Some(std::path::Path::new("nothing-here.sqlite")),
    )
    .fails(&["EMEND_STORE=nothing-here.sqlite names no store"]);
}

/// Whether this process ignores file permissions (root does).
#[cfg(unix)]
fn ignores_permissions(dir: &TestDir) -> bool {
    use std::os::unix::fs::PermissionsExt;
    let p = dir.write("probe", "x");
    std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o444)).unwrap();
    let writable = std::fs::OpenOptions::new().write(true).open(&p).is_ok();
    std::fs::remove_file(&p).unwrap();
    writable
}

/// `emend ARGS` as the user `nobody` (uid 65534) through util-linux `setpriv`, for tests run as
/// root, which ignores permissions; `None` when setpriv is not there.
#[cfg(unix)]
fn as_nobody(
    dir: &TestDir,
    args: &[&str],
    store: Option<&std::path::Path>,
) -> Option<crate::util::Output> {
    let setpriv = ["/usr/bin/setpriv", "/bin/setpriv"]
        .into_iter()
        .find(|p| std::path::Path::new(p).exists())?;
    let mut c = std::process::Command::new(setpriv);
    c.args([
        "--reuid=65534",
        "--regid=65534",
        "--clear-groups",
        crate::util::BIN,
    ])
    .args(args)
    .current_dir(dir.root())
    .env_clear()
    .env("EMEND_HOME", dir.path("nobody-home"))
    .env("EMEND_NOW", crate::util::NOW)
    .env("NO_COLOR", "1")
    .stdin(std::process::Stdio::null());
    if let Some(s) = store {
        c.env("EMEND_STORE", s);
    }
    Some(dir.run(c))
}

#[cfg(unix)]
#[test]
fn a_read_only_store_still_verifies_shows_and_exports_and_refuses_writes_clearly() {
    use std::os::unix::fs::PermissionsExt;
    let dir = small_store("read_only");
    dir.cmd(["set", "t", "1", "v", "z", "--why", "typo"]).ok();
    dir.cmd(["commit", "-m", "fix"]).ok();
    // A checkpointed store without WAL or SHM files, as a copy would be (the WAL is empty
    // once every connection has closed).
    for f in [".emend/store.sqlite-wal", ".emend/store.sqlite-shm"] {
        if std::fs::metadata(dir.path(f)).is_ok_and(|m| m.len() == 0 || f.ends_with("shm")) {
            std::fs::remove_file(dir.path(f)).unwrap();
        }
    }
    let set = |p: &str, mode: u32| {
        std::fs::set_permissions(dir.path(p), std::fs::Permissions::from_mode(mode)).unwrap()
    };
    let store = dir.store_file();
    let reader = |args: &[&str]| -> Option<crate::util::Output> {
        if ignores_permissions(&dir) {
            // Root: the store stays root's, and `nobody` reads it, named by EMEND_STORE.
            as_nobody(&dir, args, Some(&store))
        } else {
            Some(dir.cmd(args))
        }
    };
    if ignores_permissions(&dir) {
        // nobody must reach the folder; the store itself stays root's (0644 in a 0755 folder).
        set(".", 0o755);
        let Some(refused) = as_nobody(&dir, &["verify"], None) else {
            eprintln!("note: skipped the read-only store test: running as root without setpriv");
            return;
        };
        // Found by walking up, a store owned by another user is refused, naming EMEND_STORE.
        refused.fails(&["belongs to another user", "EMEND_STORE="]);
    } else {
        set(".emend/store.sqlite", 0o444);
        set(".emend", 0o555);
    }
    let verify = reader(&["verify"]).unwrap().ok();
    assert!(verify.stdout().contains("intact"), "{}", verify.stdout());
    assert!(verify.stderr().contains("immutable"), "{}", verify.stderr());
    reader(&["show", "t"]).unwrap().ok().says(&["z"]);
    assert_eq!(
        reader(&["export", "t"]).unwrap().ok().stdout(),
        "id,v\n1,z\n2,b\n"
    );
    reader(&["log"]).unwrap().ok().says(&["typo"]);
    reader(&["why", "t", "1", "v"])
        .unwrap()
        .ok()
        .says(&["typo"]);
    reader(&["diff", "t", "raw", "latest"]).unwrap().ok();
    reader(&["status"]).unwrap().ok();
    reader(&["set", "t", "2", "v", "y", "--why", "typo"])
        .unwrap()
        .fails(&["is read-only to you", "still work"]);
    // Nothing was written beside the store.
    assert!(!dir.path(".emend/store.sqlite-shm").exists());
    if !ignores_permissions(&dir) {
        set(".emend", 0o755);
        set(".emend/store.sqlite", 0o644);
    }
}

#[cfg(unix)]
#[test]
fn on_a_real_terminal_forged_text_is_escaped_and_our_colours_remain() {
    // util-linux `script` runs the commands on a pseudo-terminal, so stdout is a terminal.
    let Some(script) = ["/usr/bin/script", "/bin/script"]
        .into_iter()
        .find(|p| std::path::Path::new(p).exists())
    else {
        eprintln!("note: skipped the terminal test: util-linux `script` is not installed");
        return;
    };
    let dir = forged_store("terminal");
    let bin = format!("'{}'", crate::util::BIN.replace('\'', "'\\''"));
    let mut c = std::process::Command::new(script);
    c.args([
        "-qec",
        &format!("{bin} log; {bin} export sites; {bin} why sites A2 ph"),
        "/dev/null",
    ])
    .current_dir(dir.root())
    .env_clear()
    .env("EMEND_HOME", dir.path(crate::util::HOME))
    .env("EMEND_NOW", crate::util::NOW)
    .env("TERM", "xterm")
    .stdin(std::process::Stdio::null());
    if let Some(path) = std::env::var_os("PATH") {
        c.env("PATH", path);
    }
    let text = dir.run(c).ok().stdout();
    // ECMA-48: our bold is SGR 1 (ESC [1m); the forged erase-line is CSI 2K.
    assert!(
        text.contains("\u{1b}[1m"),
        "colours stay on a terminal: {text:?}"
    );
    assert!(!text.contains("\u{1b}[2K"), "{text:?}");
    assert!(!text.contains("\rintact"), "{text:?}");
    assert!(
        text.contains("Mallory\\u{1b}[2K\\u{d}intact"),
        "log: {text:?}"
    );
    assert!(
        text.contains("\"Mill\\u{1b}[2K\\u{d}intact\""),
        "export: {text:?}"
    );
    assert!(
        text.contains("meter\\u{1b}[2K\\u{d}intact"),
        "why: {text:?}"
    );
}
