//! The library's error type.
//!
//! Every variant names what went wrong and where (file, line, column, id) in a lowercase message
//! without a trailing period; [`Error::hint`] says what the user can do next when the library
//! knows. Dirty data found by a check is a result, never an error.

use std::path::PathBuf;

/// Result with the library [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong in the library.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A file could not be read or written.
    #[error("{path}: {err}")]
    Io {
        /// The file involved.
        path: PathBuf,
        /// The underlying error (shown in the message, so not chained as a source).
        err: std::io::Error,
    },
    /// An extract is malformed.
    #[error("{path}:{line}:{column}: {problem}")]
    BadExtract {
        /// The extract file.
        path: PathBuf,
        /// 1-based line.
        line: u64,
        /// 1-based column (field number), 0 when the whole line is at fault.
        column: u64,
        /// What is wrong.
        problem: String,
    },
    /// An extract has a problem that is not tied to one place.
    #[error("{path}: {problem}")]
    BadFile {
        /// The file.
        path: PathBuf,
        /// What is wrong.
        problem: String,
    },
    /// A workbook (`.xlsx`, `.ods`) that cannot be read as a table: not a workbook, encrypted,
    /// an old format, no such sheet, an empty sheet, a header that names no columns.
    #[error("{path}: {problem}")]
    BadWorkbook {
        /// The workbook file.
        path: PathBuf,
        /// What is wrong, naming the sheet and cell.
        problem: String,
        /// What to do about it.
        hint: String,
    },
    /// A path that names a folder where a file is needed (an extract, evidence, rules).
    #[error("{0} is a folder, not a file")]
    NotAFile(PathBuf),
    /// A path that names a device, a socket or anything else that is neither a regular file
    /// nor a pipe (reading `/dev/zero` would never end).
    #[error("{path} is {kind}, not a file or a pipe")]
    NotAnInput {
        /// The path given.
        path: PathBuf,
        /// What it is, as "a character device".
        kind: &'static str,
    },
    /// An input (evidence, a rules file) larger than the limit it is read with.
    #[error("{path} is larger than the limit of {} for evidence and rules files", mib(*limit))]
    TooLarge {
        /// The file.
        path: PathBuf,
        /// The limit, in bytes.
        limit: u64,
    },
    /// A regular file whose size or modification time moved while it was read.
    #[error(
        "{0} changed while it was being read; wait until it is completely written and try again"
    )]
    Changed(PathBuf),
    /// The key named at ingest does not identify each row.
    #[error("{path}: {problem}")]
    DuplicateKey {
        /// The extract file.
        path: PathBuf,
        /// Which key values repeat, and on which lines.
        problem: String,
    },
    /// A rules file that cannot be used; the line, column and key are kept.
    #[error("{path}: {error}")]
    BadRules {
        /// The rules file.
        path: PathBuf,
        /// Where and what.
        error: crate::checks::RuleError,
    },
    /// A rules file that is not UTF-8 text.
    #[error("{path}: not UTF-8 text (byte offset {offset})")]
    NotText {
        /// The file.
        path: PathBuf,
        /// The first bad byte.
        offset: usize,
    },
    /// A table has pending fixes, so an operation that needs a settled table is refused.
    #[error("table '{table}' has pending fixes; commit or discard them before {action}")]
    PendingFixes {
        /// Table.
        table: String,
        /// What was refused, as "a new extract" or "carrying".
        action: &'static str,
    },
    /// A fix that would change a key column.
    #[error(
        "column '{column}' is part of the key of '{table}'; rows are named by it, so its values cannot be changed"
    )]
    KeyColumn {
        /// Table.
        table: String,
        /// Column.
        column: String,
    },
    /// A tag name that is already used (tags never move).
    #[error(
        "tag '{name}' already names commit {target} (tagged in commit {seq}); tags never move, choose another name"
    )]
    TagTaken {
        /// The name.
        name: String,
        /// The commit it names.
        target: u64,
        /// The commit that made the tag.
        seq: u64,
    },
    /// No store was found walking up from a folder.
    #[error("no emend store in {0} or any parent folder")]
    NoStore(PathBuf),
    /// `init` in a folder that already has a store.
    #[error("a store already exists at {0}")]
    StoreExists(PathBuf),
    /// The file is not an emend store.
    #[error("{0} is not an emend store")]
    NotAStore(PathBuf),
    /// A store found by walking up whose file or folder belongs to another user (issue 16):
    /// whoever owns it decides what it says, so it is not used without being named.
    #[error(
        "the store at {path} belongs to another user (uid {owner}; you are uid {me}), so it was not used"
    )]
    ForeignStore {
        /// The file or folder owned by someone else.
        path: PathBuf,
        /// Its owner's uid.
        owner: u32,
        /// The current user's uid.
        me: u32,
    },
    /// No space is left to write the store (SQLITE_FULL, ENOSPC).
    #[error("no space left to write the store{}: the disk (or a size limit) is full", at(.path))]
    DiskFull {
        /// The store file, when known.
        path: Option<PathBuf>,
    },
    /// The store's file or folder cannot be written by this user (SQLITE_READONLY, EACCES).
    #[error("the store{} is read-only to you (its file or folder permissions allow reading only)", at(.path))]
    ReadOnlyStore {
        /// The store file, when known.
        path: Option<PathBuf>,
    },
    /// The store sits on media mounted read-only (EROFS).
    #[error("the store at {0} is on read-only media (a read-only file system)")]
    ReadOnlyMedia(PathBuf),
    /// The store was written by a newer build.
    #[error("store at {path} uses schema v{found}; this build reads up to v{supported}")]
    SchemaTooNew {
        /// The store file.
        path: PathBuf,
        /// Version found.
        found: u32,
        /// Newest version this build knows.
        supported: u32,
    },
    /// A table name that the store does not know.
    #[error("no table named '{0}'")]
    UnknownTable(String),
    /// A column that the table does not have.
    #[error("table '{table}' has no column '{column}'")]
    UnknownColumn {
        /// Table.
        table: String,
        /// Column asked for.
        column: String,
    },
    /// A row that the table does not have.
    #[error("table '{table}' has no row '{row}'")]
    UnknownRow {
        /// Table.
        table: String,
        /// Row asked for, as typed.
        row: String,
    },
    /// A revision that names nothing.
    #[error("no commit matches revision '{0}'")]
    UnknownRevision(String),
    /// A hash prefix that names several commits.
    #[error("revision '{prefix}' is ambiguous: {}", candidates.join(", "))]
    AmbiguousRevision {
        /// The prefix typed.
        prefix: String,
        /// The matching ids.
        candidates: Vec<String>,
    },
    /// A fix was given without a reason.
    #[error("every fix needs a reason: --why is empty")]
    EmptyReason,
    /// A request that cannot be carried out as asked.
    #[error("{0}")]
    Invalid(String),
    /// `commit` with nothing pending.
    #[error("nothing to commit: no pending fixes")]
    NothingPending,
    /// The store is damaged in a way that stops the operation.
    #[error("store is damaged: {0}")]
    Corrupt(String),
    /// What the store holds disagrees with its signed commits: stored bytes, a derived row or
    /// the chain itself was changed outside emend. Reads refuse rather than show it.
    #[error("the store was changed outside emend: {0}")]
    Tampered(String),
    /// The store file holds schema objects emend did not make (a trigger, a view, an index,
    /// changed columns): emend refuses to run anything in it.
    #[error("{path} holds what emend never made: {}", objects.join("; "))]
    ForeignSchema {
        /// The store file.
        path: PathBuf,
        /// Each object, named with what is wrong with it.
        objects: Vec<String>,
    },
    /// Another process holds the store's write lock for too long.
    #[error("the store is busy: another emend process is writing")]
    Busy,
    /// A signing key problem.
    #[error("{0}")]
    Key(String),
    /// The team store's server cannot be reached, or the connection broke.
    #[error("cannot reach the team store {server}: {problem}")]
    TeamUnreachable {
        /// The server, as the user named it (no password).
        server: String,
        /// What went wrong.
        problem: String,
    },
    /// The server refused what this role tried (PostgreSQL's permissions or emend's triggers).
    #[error("the team store {server} refused: {problem}")]
    TeamRefused {
        /// The server, as the user named it (no password).
        server: String,
        /// What PostgreSQL said.
        problem: String,
    },
    /// Someone published since this store last heard from the team.
    #[error(
        "the team moved on: the team store's head is commit {theirs}, and your commits follow commit {ours}"
    )]
    TeamMovedOn {
        /// The last team commit this store knows.
        ours: u64,
        /// The team's head now.
        theirs: u64,
    },
    /// The team store's history and this store's disagree on a commit both hold.
    #[error("the team store {server} and this store disagree: {problem}")]
    TeamDiverged {
        /// The server, as the user named it (no password).
        server: String,
        /// Which commit, and how.
        problem: String,
    },
    /// The command needs a store that follows a team store.
    #[error("this store follows no team store")]
    NoTeam,
    /// The server holds no team store, or another program's tables.
    #[error("{server}: {problem}")]
    TeamSchema {
        /// The server, as the user named it (no password).
        server: String,
        /// What is wrong.
        problem: String,
    },
    /// A SQLite failure that the store layer did not map to a domain error.
    #[error("database error: {0}")]
    Sqlite(rusqlite::Error),
    /// A commit body could not be encoded or decoded.
    #[error("encoding error: {0}")]
    Encoding(#[from] postcard::Error),
}

/// ` at PATH` when the path is known.
fn at(path: &Option<PathBuf>) -> String {
    path.as_ref()
        .map(|p| format!(" at {}", p.display()))
        .unwrap_or_default()
}

impl From<rusqlite::Error> for Error {
    /// A full disk and a read-only store get their own variants wherever SQLite reports them.
    fn from(e: rusqlite::Error) -> Self {
        match e.sqlite_error_code() {
            Some(rusqlite::ErrorCode::DiskFull) => Error::DiskFull { path: None },
            Some(rusqlite::ErrorCode::ReadOnly) => Error::ReadOnlyStore { path: None },
            _ => Error::Sqlite(e),
        }
    }
}

/// The advice for commands that only read, shared by the read-only variants.
const READING_STILL_WORKS: &str = "commands that only read (verify, show, export, log, why, diff, status, check, profile, tags) still work";

/// A size in bytes as MiB for messages ("256 MiB", "0.5 MiB").
pub(crate) fn mib(bytes: u64) -> String {
    const MIB: u64 = 1024 * 1024;
    if bytes.is_multiple_of(MIB) {
        format!("{} MiB", bytes / MIB)
    } else {
        format!("{:.3} MiB", bytes as f64 / MIB as f64)
    }
}

impl Error {
    /// What the user can do next, when the library knows.
    pub fn hint(&self) -> Option<String> {
        Some(match self {
            Error::NoStore(_) => "run 'emend init' in the project folder first".into(),
            Error::StoreExists(_) => "use the existing store, or init in another folder".into(),
            Error::NotAStore(_) => {
                "this file was not made by emend; it was left untouched".into()
            }
            Error::SchemaTooNew { .. } => "upgrade emend to open this store".into(),
            Error::ForeignStore { path, .. } => format!(
                "if you trust its owner, name the store explicitly: EMEND_STORE={} emend ...; else run emend in a folder of your own ('emend init')",
                path.display()
            ),
            Error::DiskFull { .. } => "nothing was changed (the write was rolled back); free space on the disk that holds the store and run the command again".into(),
            Error::ReadOnlyStore { .. } => format!(
                "{READING_STILL_WORKS}; to change the store, ask its owner for write permission or work on a copy"
            ),
            Error::ReadOnlyMedia(_) => format!(
                "{READING_STILL_WORKS}; to change the store, copy its project folder to writable media"
            ),
            Error::UnknownTable(_) => "'emend tables' lists the tables".into(),
            Error::UnknownColumn { table, .. } => {
                format!("'emend show {table} --rows 1-5' shows the columns")
            }
            Error::UnknownRow { table, .. } => format!(
                "rows are named by the table's key value, or by 1-based position when '{table}' has no key"
            ),
            Error::UnknownRevision(_) => {
                "a revision is a commit number, a tag, 8+ hex digits of an id, 'latest' or 'raw'; 'emend log' lists them".into()
            }
            Error::EmptyReason => "say why, e.g. --why \"lab sheet says 7.1\"".into(),
            Error::NothingPending => "record a fix first (set, recode, missing, tidy, exclude, keep, note, …; emend --help lists them)".into(),
            Error::Busy => "wait for the other process to finish and try again".into(),
            Error::TeamUnreachable { .. } => "check the address, that the server is running and that it lets you in (a password comes from the address or PGPASSWORD); every read command and every fix still works without the server".into(),
            Error::TeamRefused { .. } => "nothing was changed on the server; your role may only read (auditors), or lacks a grant: docs/team.md shows the roles an administrator creates".into(),
            Error::TeamMovedOn { .. } => "run 'emend receive': it brings the team's commits and replays your unpublished fixes on top, for you to review ('emend status') and commit again; then publish".into(),
            Error::TeamDiverged { .. } => "nothing was changed here; run 'emend verify --team ADDRESS' and tell whoever runs the team store: a history that was cut or rewritten on the server is not followed".into(),
            Error::NoTeam => "make a store that follows a team store with 'emend join ADDRESS' in a new folder, or start a team store from this one with 'emend init --team ADDRESS'".into(),
            Error::TeamSchema { .. } => "a team store is made by 'emend init --team ADDRESS' (docs/team.md)".into(),
            Error::Corrupt(_) => "run 'emend verify' for a full list of problems".into(),
            Error::Tampered(_) => "nothing was shown or written from it; 'emend verify' lists every problem, and 'emend verify --receipt FILE' shows whether history was cut. Keep this file for the audit and work from a copy you trust".into(),
            Error::ForeignSchema { .. } => "a trigger or view in the store file could change what emend writes or shows, so nothing was run; keep the file for the audit and work from a copy you trust ('emend verify' lists what else changed)".into(),
            Error::BadExtract { .. } => {
                "nothing was stored; fix the file (or give --delimiter / --encoding) and ingest again".into()
            }
            Error::BadWorkbook { hint, .. } => hint.clone(),
            Error::BadFile { .. } => "nothing was stored; fix the file or the options and ingest again".into(),
            Error::DuplicateKey { .. } => {
                "nothing was stored; name a key that identifies each row (--key A --key B for a composite key), or ingest without --key".into()
            }
            Error::BadRules { .. } | Error::NotText { .. } => {
                "nothing was adopted; fix the rules file (its format is in docs/rules.md) and run again".into()
            }
            Error::PendingFixes { .. } => {
                "'emend status' lists them; 'emend commit -m ...' or 'emend discard'".into()
            }
            Error::TagTaken { .. } => "'emend tags' lists the names in use".into(),
            Error::NotAnInput { .. } | Error::NotAFile(_) => {
                "give a regular file or a pipe (for ingest, '-' reads standard input); nothing was stored".into()
            }
            Error::TooLarge { .. } => {
                "nothing was stored; set EMEND_MAX_EVIDENCE_MIB to a larger number of MiB to raise the limit".into()
            }
            Error::Changed(_) => "nothing was stored".into(),
            _ => return None,
        })
    }

    pub(crate) fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            err: source,
        }
    }
}
