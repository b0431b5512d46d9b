//! The command line: argument parsing, one module per command or group of commands (named after
//! them), human and JSON output. The only code that prints, reads environment variables or uses
//! clap and anyhow; the environment is read once, into the [`CliContext`] each command gets.

mod check;
mod commit;
mod context;
mod demo;
mod diff;
mod edits;
mod export;
mod fixes;
mod id;
mod ingest;
mod out;
mod profile;
mod receipt;
mod shell;
mod show;
mod tag;
#[cfg(feature = "team")]
mod team;
mod trust;
mod verify;
mod why;

use context::CliContext;

use anyhow::Result;
use clap::{Args, Parser, Subcommand};

/// Exit code: the command ran and the answer is yes (or it did what was asked).
pub const EXIT_OK: i32 = 0;
/// Exit code: the command ran and found problems (`verify`).
pub const EXIT_FOUND: i32 = 1;
/// Exit code: usage or input error.
pub const EXIT_ERROR: i32 = 2;
/// `verify`: nothing was altered, but some commits are signed by keys not trusted at them.
pub const EXIT_UNTRUSTED: i32 = 3;

#[derive(Parser, Debug)]
#[command(
    name = "emend",
    version,
    about = "Keep raw data extracts unchanged and every cleaning decision signed, explained and reversible",
    long_about = "emend keeps raw data extracts byte for byte, records each cleaning fix as a signed commit \
of cell-level edits with a reason, and rebuilds, exports and verifies any cleaned version.\n\n\
Start with 'emend demo' to see a worked example, or 'emend init' in a project folder.",
    after_help = "Environment: EMEND_HOME sets where your signing identity is kept (default: your config folder); \
EMEND_NOW fixes the time recorded in commits (RFC 3339, for reproducible runs); NO_COLOR turns colour off; \
EMEND_STORE names the store to use (its .emend/store.sqlite file or project folder) instead of the one found by walking up \
from the current folder, which is refused when another user owns it. Commands that only read (verify, show, export, log, why, \
diff, status, check, profile, tags) work on a store you can read but not write. \
EMEND_MAX_FIELD_MIB is the largest field or row an input CSV may hold (default 64 MiB); \
EMEND_MAX_EVIDENCE_MIB is the largest evidence or rules file (default 256 MiB); \
EMEND_THREADS is how many threads profile, check, diff, export and report use (default: one per core).\n\n\
Inputs are regular files or pipes, each read once; 'emend ingest -' reads the extract from standard input."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Create a store in the current folder (.emend/store.sqlite), or with --team a team store
    /// on a PostgreSQL server that this store publishes to
    Init(InitArgs),
    /// Make or show your signing identity
    #[command(subcommand)]
    Id(IdCommand),
    /// Store a raw extract (CSV or TSV) as a new signed commit
    Ingest(ingest::IngestArgs),
    /// List the tables and their newest extracts
    Tables(JsonFlag),
    /// Print rows of a table version
    Show(show::ShowArgs),
    /// Find what needs cleaning: types, missing codes, outliers, spellings, suspect columns
    Profile(profile::ProfileArgs),
    /// Set one cell, or the chosen rows of a column, to a value, missing or a number transform
    #[command(allow_negative_numbers = true)]
    Set(fixes::SetArgs),
    /// Replace values across a column
    #[command(allow_negative_numbers = true)]
    Recode(fixes::RecodeArgs),
    /// Declare missing-value codes for a column; matching cells become missing
    #[command(allow_negative_numbers = true)]
    Missing(fixes::MissingArgs),
    /// Tidy text in a column: spacing, a final full stop, letter case
    Tidy(edits::TidyArgs),
    /// Replace a pattern in a column's text (regular expression)
    Replace(edits::ReplaceArgs),
    /// Rewrite dates written in a stated day/month order as ISO 8601
    Dates(edits::DatesArgs),
    /// Leave rows out of the cleaned data: one, chosen, or the duplicates
    Exclude(fixes::ExcludeArgs),
    /// Keep values as they are, on purpose, with the reason (answers what profile found)
    Keep(edits::KeepArgs),
    /// Flag cells or rows for review without changing them
    Note(edits::NoteArgs),
    /// Mark a column as not to be trusted (export leaves it out)
    Distrust(fixes::DistrustArgs),
    /// Adopt a rules file for a table (a signed commit with a reason)
    Rules(check::RulesArgs),
    /// Apply the rules in force to a version; exit 1 when an error-level rule is broken
    Check(check::CheckArgs),
    /// List the fixes waiting to be committed
    Status(JsonFlag),
    /// A reviewer's decisions from a file
    #[command(subcommand)]
    Decisions(edits::DecisionsCommand),
    /// Withdraw a committed fix (by COMMIT.FIX as 'emend log' numbers it) in a new commit
    Withdraw(edits::WithdrawArgs),
    /// Drop one pending fix (by its number in 'emend status'), or every pending fix
    Discard(commit::DiscardArgs),
    /// Replay the fixes made on a table's previous extract onto its newest one
    Carry(commit::CarryArgs),
    /// Sign and commit the pending fixes
    Commit(commit::CommitArgs),
    /// Answer a carried conflict: apply the fix anyway, keep the source value, set another, or defer
    Resolve(commit::ResolveArgs),
    /// List commits, newest last
    Log(show::LogArgs),
    /// Every changed cell, row and mark between two versions
    Diff(diff::DiffArgs),
    /// The life of one value (or row, or column): every fix, who, when, why
    Why(why::WhyArgs),
    /// Name a commit with a signed tag
    Tag(tag::TagArgs),
    /// List tags
    Tags(JsonFlag),
    /// Write a table version as CSV (or the raw extract bytes)
    Export(export::ExportArgs),
    /// Write a stored evidence file back out, checked against its hash
    Evidence(export::EvidenceArgs),
    /// A signed receipt of the store's head, to keep outside the store ('verify --receipt'
    /// shows whether history was cut since)
    Receipt(receipt::ReceiptArgs),
    /// Write one self-contained HTML report of a version for an auditor
    Report(export::ReportArgs),
    /// Vouch for another signing key in a signed commit (key rotation, a new colleague)
    Trust(trust::TrustArgs),
    /// Check every hash, signature, table version and index row
    Verify(verify::VerifyArgs),
    /// Make a store in the current folder that follows a team store (docs/team.md)
    #[cfg(feature = "team")]
    Join(team::JoinArgs),
    /// Send your commits to the team store; refused if the team moved on (then 'receive')
    #[cfg(feature = "team")]
    Publish,
    /// Bring the team's commits; your unpublished work is replayed on top for review
    #[cfg(feature = "team")]
    Receive,
    /// Build a store from bundled demo data and record a cleaning pass
    Demo(demo::DemoArgs),
    /// Print a shell completion script (bash, zsh, fish, powershell, elvish)
    Completions(shell::CompletionsArgs),
    /// Print the manual page (roff; 'emend manual | man -l -' reads it)
    Manual,
}

#[derive(Subcommand, Debug)]
enum IdCommand {
    /// Make a new Ed25519 signing identity
    New(id::NewArgs),
    /// Show your identity and whether this store trusts it
    Show(IdShowArgs),
}

#[derive(Args, Debug)]
struct IdShowArgs {
    /// Print only the public key (64 hex digits), for 'emend trust' or a key list
    #[arg(long, conflicts_with = "json")]
    key: bool,
    /// Print JSON (the shape is documented in docs/json.md)
    #[arg(long)]
    json: bool,
}

#[derive(Args, Debug)]
struct InitArgs {
    /// Also make a team store on this PostgreSQL database (postgres://USER@HOST/DATABASE,
    /// empty, USER its owner) and publish this store's history to it
    #[cfg(feature = "team")]
    #[arg(long, value_name = "ADDRESS")]
    team: Option<String>,
    /// The role whose members may publish (made by an administrator, docs/team.md)
    #[cfg(feature = "team")]
    #[arg(
        long,
        value_name = "ROLE",
        default_value = "emend_writer",
        requires = "team"
    )]
    writers: String,
    /// The role whose members may only read: verify, join, receive, export, report
    #[cfg(feature = "team")]
    #[arg(
        long,
        value_name = "ROLE",
        default_value = "emend_auditor",
        requires = "team"
    )]
    auditors: String,
}

#[derive(Args, Debug)]
struct JsonFlag {
    /// Print JSON (the shape is documented in docs/json.md)
    #[arg(long)]
    json: bool,
}

/// Run the command line; returns the process exit code.
pub fn main() -> i32 {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { EXIT_ERROR } else { EXIT_OK };
            let _ = e.print();
            return code;
        }
    };
    match run(cli) {
        Ok(code) => code,
        Err(err) => {
            if is_broken_pipe(&err) {
                return EXIT_OK;
            }
            out::error(&err);
            EXIT_ERROR
        }
    }
}

fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|e| {
        e.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
            || e.downcast_ref::<serde_json::Error>()
                .is_some_and(|j| j.io_error_kind() == Some(std::io::ErrorKind::BrokenPipe))
            || e.downcast_ref::<emend::Error>().is_some_and(|le| {
                matches!(le, emend::Error::Io { err, .. } if err.kind() == std::io::ErrorKind::BrokenPipe)
            })
    })
}

fn run(cli: Cli) -> Result<i32> {
    let cx = &CliContext::from_env()?;
    cx.start_thread_pool()?;
    // Commands that may add a commit add a receipt of the new head to the user's receipt
    // file, when one is named ('receipt --keep-in').
    let may_commit = matches!(
        cli.command,
        Command::Ingest(_)
            | Command::Commit(_)
            | Command::Tag(_)
            | Command::Trust(_)
            | Command::Rules(_)
            | Command::Carry(_)
            | Command::Resolve(_)
            | Command::Withdraw(_)
            | Command::Decisions(_)
    ) || receives(&cli.command);
    let before = if may_commit {
        receipt::head_before(cx)
    } else {
        None
    };
    let code = dispatch(cx, cli)?;
    if may_commit {
        receipt::after_command(cx, before);
    }
    Ok(code)
}

/// Whether the command may sign commits of its own while receiving (replayed ingests).
fn receives(command: &Command) -> bool {
    #[cfg(feature = "team")]
    if matches!(command, Command::Receive) {
        return true;
    }
    let _ = command;
    false
}

fn dispatch(cx: &CliContext, cli: Cli) -> Result<i32> {
    match cli.command {
        #[cfg(feature = "team")]
        Command::Init(InitArgs {
            team: Some(address),
            writers,
            auditors,
        }) => team::init_team(cx, &address, &writers, &auditors),
        Command::Init(_) => ingest::init(cx),
        #[cfg(feature = "team")]
        Command::Join(a) => team::join(cx, a),
        #[cfg(feature = "team")]
        Command::Publish => team::publish(cx),
        #[cfg(feature = "team")]
        Command::Receive => team::receive(cx),
        Command::Id(IdCommand::New(a)) => id::new(cx, a),
        Command::Id(IdCommand::Show(f)) => id::show(cx, f.json, f.key),
        Command::Ingest(a) => ingest::ingest(cx, a),
        Command::Tables(f) => show::tables(cx, f.json),
        Command::Show(a) => show::show(cx, a),
        Command::Profile(a) => profile::run(cx, a),
        Command::Set(a) => fixes::set(cx, a),
        Command::Recode(a) => fixes::recode(cx, a),
        Command::Missing(a) => fixes::missing(cx, a),
        Command::Exclude(a) => fixes::exclude(cx, a),
        Command::Tidy(a) => edits::tidy(cx, a),
        Command::Replace(a) => edits::replace(cx, a),
        Command::Dates(a) => edits::dates(cx, a),
        Command::Keep(a) => edits::keep(cx, a),
        Command::Note(a) => edits::note(cx, a),
        Command::Withdraw(a) => edits::withdraw(cx, a),
        Command::Decisions(c) => edits::decisions(cx, c),
        Command::Distrust(a) => fixes::distrust(cx, a),
        Command::Status(f) => commit::status(cx, f.json),
        Command::Discard(a) => commit::discard(cx, a),
        Command::Rules(a) => check::adopt(cx, a),
        Command::Check(a) => check::check(cx, a),
        Command::Carry(a) => commit::carry(cx, a),
        Command::Commit(a) => commit::commit(cx, a),
        Command::Resolve(a) => commit::resolve(cx, a),
        Command::Log(a) => show::log(cx, a),
        Command::Export(a) => export::export(cx, a),
        Command::Diff(a) => diff::diff_cmd(cx, a),
        Command::Why(a) => why::why_cmd(cx, a),
        Command::Tag(a) => tag::tag_cmd(cx, a),
        Command::Tags(f) => tag::tags_cmd(cx, f.json),
        Command::Verify(a) => verify::verify(cx, a),
        Command::Trust(a) => trust::trust_key(cx, a),
        Command::Report(a) => export::report(cx, a),
        Command::Evidence(a) => export::evidence(cx, a),
        Command::Receipt(a) => receipt::receipt_cmd(cx, a),
        Command::Demo(a) => demo::run(cx, a),
        Command::Completions(a) => shell::completions(a),
        Command::Manual => shell::manual(),
    }
}
