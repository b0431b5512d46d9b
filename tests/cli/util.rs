//! Test harness: a fresh temp folder per test, the real `emend` binary run in it with a cleared
//! environment, and helpers to look inside the store file and to parse CSV independently of emend.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::{Command, ExitStatus, Stdio};

/// The binary under test.
pub const BIN: &str = env!("CARGO_BIN_EXE_emend");
/// The fixed clock every command sees.
pub const NOW: &str = "2026-10-01T09:00:00Z";
/// The folder (inside the temp dir) that holds the default identity.
pub const HOME: &str = ".identity";

/// A fresh temporary project folder.
pub struct TestDir {
    _tmp: tempfile::TempDir,
    root: PathBuf,
    name: String,
}

impl TestDir {
    /// A new empty folder; `name` appears in failure reports.
    pub fn new(name: &str) -> TestDir {
        let tmp = tempfile::Builder::new()
            .prefix(&format!("emend-cli-{name}-"))
            .tempdir()
            .expect("temp dir");
        let root = tmp.path().canonicalize().expect("canonical temp dir");
        TestDir {
            _tmp: tmp,
            root,
            name: name.to_string(),
        }
    }

    /// The folder itself.
    pub fn root(&self) -> &Path {
        &self.root
    }

    /// A path inside the folder.
    pub fn path(&self, name: &str) -> PathBuf {
        self.root.join(name)
    }

    /// Write a text file (parent folders are made).
    pub fn write(&self, name: &str, text: &str) -> PathBuf {
        self.write_bytes(name, text.as_bytes())
    }

    /// Write a file of bytes (parent folders are made).
    pub fn write_bytes(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.path(name);
        if let Some(parent) = p.parent() {
            std::fs::create_dir_all(parent).expect("mkdir");
        }
        std::fs::write(&p, bytes).expect("write file");
        p
    }

    /// Read a file in the folder.
    pub fn read(&self, name: &str) -> Vec<u8> {
        std::fs::read(self.path(name)).unwrap_or_else(|e| panic!("reading {name}: {e}"))
    }

    /// A `Command` for the binary, run in `cwd` (relative to the folder) with identity folder
    /// `home` (relative to the folder), the environment cleared except PATH.
    pub fn command_in<I, S>(&self, cwd: &str, home: &str, args: I) -> Command
    where
        I: IntoIterator<Item = S>,
        S: AsRef<std::ffi::OsStr>,
    {
        let mut c = Command::new(BIN);
        c.args(args)
            .current_dir(self.path(cwd))
            .env_clear()
            .env("EMEND_HOME", self.path(home))
            .env("EMEND_NOW", NOW)
            .env("NO_COLOR", "1")
            .stdin(Stdio::null());
        if let Some(path) = std::env::var_os("PATH") {
            c.env("PATH", path);
        }
        c
    }

    /// A `Command` run in the folder with the default identity.
    pub fn command<I, S>(&self, args: I) -> Command
    where
        I: IntoIterator<Item = S>,
        S: AsRef<std::ffi::OsStr>,
    {
        self.command_in(".", HOME, args)
    }

    /// Run a prepared command to completion.
    pub fn run(&self, mut c: Command) -> Output {
        let cmdline = format!(
            "{} {}",
            c.get_program().to_string_lossy(),
            c.get_args()
                .map(|a| format!("{:?}", a.to_string_lossy()))
                .collect::<Vec<_>>()
                .join(" ")
        );
        let out = c
            .output()
            .unwrap_or_else(|e| panic!("running {cmdline}: {e}"));
        Output {
            cmdline,
            cwd: c
                .get_current_dir()
                .map(Path::to_path_buf)
                .unwrap_or_else(|| self.root.clone()),
            test: self.name.clone(),
            root: self.root.clone(),
            status: out.status,
            stdout: out.stdout,
            stderr: out.stderr,
        }
    }

    /// Run `emend ARGS` in the folder.
    pub fn cmd<I, S>(&self, args: I) -> Output
    where
        I: IntoIterator<Item = S>,
        S: AsRef<std::ffi::OsStr>,
    {
        self.run(self.command(args))
    }

    /// Run `emend ARGS` in the folder with another identity folder.
    pub fn cmd_as<I, S>(&self, home: &str, args: I) -> Output
    where
        I: IntoIterator<Item = S>,
        S: AsRef<std::ffi::OsStr>,
    {
        self.run(self.command_in(".", home, args))
    }

    /// The store file.
    pub fn store_file(&self) -> PathBuf {
        self.path(".emend/store.sqlite")
    }

    /// Copy every file of `other` (store, identity, extracts) into this folder.
    pub fn copy_from(&self, other: &TestDir) {
        copy_tree(other.root(), self.root());
    }
}

fn copy_tree(from: &Path, to: &Path) {
    for entry in std::fs::read_dir(from).expect("read dir") {
        let entry = entry.expect("dir entry");
        let target = to.join(entry.file_name());
        if entry.file_type().expect("file type").is_dir() {
            std::fs::create_dir_all(&target).expect("mkdir");
            copy_tree(&entry.path(), &target);
        } else {
            // fs::copy keeps the permission bits (the key file stays 0600).
            std::fs::copy(entry.path(), &target).expect("copy");
        }
    }
}

/// Every file under `dir`, one per line, with sizes.
pub fn listing(dir: &Path) -> String {
    fn walk(dir: &Path, base: &Path, out: &mut String) {
        let Ok(rd) = std::fs::read_dir(dir) else {
            return;
        };
        let mut entries: Vec<_> = rd.filter_map(Result::ok).collect();
        entries.sort_by_key(|e| e.file_name());
        for e in entries {
            let p = e.path();
            let rel = p.strip_prefix(base).unwrap_or(&p).display().to_string();
            if p.is_dir() {
                let _ = writeln!(out, "  {rel}/");
                walk(&p, base, out);
            } else {
                let len = e.metadata().map(|m| m.len()).unwrap_or(0);
                let _ = writeln!(out, "  {rel} ({len} bytes)");
            }
        }
    }
    let mut out = String::new();
    walk(dir, dir, &mut out);
    out
}

/// What a finished command did.
pub struct Output {
    cmdline: String,
    cwd: PathBuf,
    test: String,
    root: PathBuf,
    /// Exit status.
    pub status: ExitStatus,
    stdout: Vec<u8>,
    stderr: Vec<u8>,
}

impl Output {
    /// The output of a command that was spawned rather than run with [`TestDir::run`].
    #[allow(dead_code)]
    pub fn from_parts(dir: &TestDir, c: &Command, out: std::process::Output) -> Output {
        Output {
            cmdline: format!(
                "{} {}",
                c.get_program().to_string_lossy(),
                c.get_args()
                    .map(|a| format!("{:?}", a.to_string_lossy()))
                    .collect::<Vec<_>>()
                    .join(" ")
            ),
            cwd: c
                .get_current_dir()
                .map(Path::to_path_buf)
                .unwrap_or_else(|| dir.root.clone()),
            test: dir.name.clone(),
            root: dir.root.clone(),
            status: out.status,
            stdout: out.stdout,
            stderr: out.stderr,
        }
    }

    /// The exit code, if the process exited.
    #[allow(dead_code)]
    pub fn status_code(&self) -> Option<i32> {
        self.status.code()
    }

    fn report(&self, what: &str) -> String {
        format!(
            "\n=== {what} (test {})\ncommand: {}\ncwd: {}\nstatus: {}\n--- stdout\n{}\n--- stderr\n{}\n--- files in {}\n{}",
            self.test,
            self.cmdline,
            self.cwd.display(),
            self.status,
            String::from_utf8_lossy(&self.stdout),
            String::from_utf8_lossy(&self.stderr),
            self.root.display(),
            listing(&self.root)
        )
    }

    /// Assert exit code 0.
    #[track_caller]
    pub fn ok(self) -> Self {
        if self.status.code() != Some(0) {
            panic!("{}", self.report("expected exit 0"));
        }
        self
    }

    /// Assert exit code `n`.
    #[track_caller]
    pub fn code(self, n: i32) -> Self {
        if self.status.code() != Some(n) {
            panic!("{}", self.report(&format!("expected exit {n}")));
        }
        self
    }

    /// Assert exit 2 with an `emend: error:` message that contains every needle.
    #[track_caller]
    pub fn fails(self, needles: &[&str]) -> Self {
        let s = self.code(2);
        let err = s.stderr();
        if !err.starts_with("emend: error: ") && !err.starts_with("error: ") {
            panic!("{}", s.report("stderr does not start with 'emend: error:'"));
        }
        for n in needles {
            if !err.contains(n) {
                panic!("{}", s.report(&format!("stderr lacks {n:?}")));
            }
        }
        s
    }

    /// Assert stdout contains every needle.
    #[track_caller]
    pub fn says(self, needles: &[&str]) -> Self {
        let out = self.stdout();
        for n in needles {
            if !out.contains(n) {
                panic!("{}", self.report(&format!("stdout lacks {n:?}")));
            }
        }
        self
    }

    /// Standard output as text.
    pub fn stdout(&self) -> String {
        String::from_utf8(self.stdout.clone()).expect("stdout is UTF-8")
    }

    /// Standard output bytes.
    pub fn stdout_bytes(&self) -> &[u8] {
        &self.stdout
    }

    /// Standard error as text.
    pub fn stderr(&self) -> String {
        String::from_utf8_lossy(&self.stderr).into_owned()
    }

    /// Standard output parsed as JSON.
    #[track_caller]
    pub fn json(&self) -> serde_json::Value {
        serde_json::from_slice(&self.stdout)
            .unwrap_or_else(|e| panic!("{}", self.report(&format!("stdout is not JSON: {e}"))))
    }
}

/// `init` then `id new` with the default identity folder.
pub fn setup_store(dir: &TestDir) {
    dir.cmd(["init"])
        .ok()
        .says(&["ready: this folder's history begins"]);
    dir.cmd([
        "id",
        "new",
        "--name",
        "Test Steward",
        "--email",
        "t@example.org",
    ])
    .ok()
    .says(&["Test Steward"]);
}

/// Open the store file directly (for inspection and tampering).
pub fn open_db(dir: &TestDir) -> rusqlite::Connection {
    rusqlite::Connection::open(dir.store_file()).expect("open store with rusqlite")
}

/// Count the rows of a table in the store file.
pub fn count(dir: &TestDir, table: &str) -> i64 {
    open_db(dir)
        .query_row(&format!("SELECT COUNT(*) FROM {table}"), [], |r| r.get(0))
        .expect("count")
}

/// What "the store is unchanged" compares: the log as JSON and the row counts of every table.
#[derive(Debug, PartialEq, Eq)]
pub struct StoreState {
    log: String,
    counts: Vec<(&'static str, i64)>,
}

/// Snapshot the store.
pub fn store_state(dir: &TestDir) -> StoreState {
    let log = dir.cmd(["log", "--json"]).ok().stdout();
    let counts = [
        "commit_log",
        "chunk",
        "blob",
        "blob_chunk",
        "pending",
        "row_map",
        "mark",
        "version_index",
        "extract_index",
        "signer",
    ]
    .into_iter()
    .map(|t| (t, count(dir, t)))
    .collect();
    StoreState { log, counts }
}

/// A small RFC 4180 parser, independent of emend's: `delim`-separated fields, double-quoted
/// fields with doubled quotes, LF / CR LF line ends, an optional UTF-8 BOM skipped.
pub fn parse_csv(text: &str, delim: char) -> Vec<Vec<String>> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut rows = Vec::new();
    let mut row = Vec::new();
    let mut field = String::new();
    let mut chars = text.chars().peekable();
    let mut in_quotes = false;
    let mut any = false;
    while let Some(c) = chars.next() {
        any = true;
        if in_quotes {
            if c == '"' {
                if chars.peek() == Some(&'"') {
                    chars.next();
                    field.push('"');
                } else {
                    in_quotes = false;
                }
            } else {
                field.push(c);
            }
        } else if c == '"' {
            in_quotes = true;
        } else if c == delim {
            row.push(std::mem::take(&mut field));
        } else if c == '\r' || c == '\n' {
            if c == '\r' && chars.peek() == Some(&'\n') {
                chars.next();
            }
            row.push(std::mem::take(&mut field));
            rows.push(std::mem::take(&mut row));
            any = false;
        } else {
            field.push(c);
        }
    }
    assert!(!in_quotes, "test CSV has an unterminated quote");
    if any {
        row.push(field);
        rows.push(row);
    }
    rows
}

/// Write rows as CSV with minimal RFC 4180 quoting (a field is quoted when it holds the
/// delimiter, a quote, CR or LF), LF line ends.
pub fn write_csv(rows: &[Vec<String>], delim: char) -> String {
    let mut out = String::new();
    for r in rows {
        let fields: Vec<String> = r
            .iter()
            .map(|f| {
                if f.contains(delim) || f.contains('"') || f.contains('\n') || f.contains('\r') {
                    format!("\"{}\"", f.replace('"', "\"\""))
                } else {
                    f.clone()
                }
            })
            .collect();
        out.push_str(&fields.join(&delim.to_string()));
        out.push('\n');
    }
    out
}

/// Rows of string literals.
pub fn rows(lines: &[&[&str]]) -> Vec<Vec<String>> {
    lines
        .iter()
        .map(|l| l.iter().map(|s| s.to_string()).collect())
        .collect()
}

/// Assert that no ANSI escape appears in `text`.
#[track_caller]
pub fn assert_no_ansi(what: &str, text: &str) {
    assert!(
        !text.contains('\u{1b}'),
        "{what} holds an ANSI escape: {text:?}"
    );
}

/// Write the walk-through's river extract and ingest it as table `samples`, keyed by
/// `sample_id` (the setup most integration tests start from).
pub fn ingest_river(dir: &TestDir) {
    dir.write("river.csv", crate::walkthrough::RIVER_CSV);
    dir.cmd([
        "ingest",
        "river.csv",
        "--table",
        "samples",
        "--key",
        "sample_id",
    ])
    .ok();
}
