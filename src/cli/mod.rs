//! The command line: argument parsing, one module per group of subcommands, human and JSON
//! output. The only code that prints, reads environment variables or uses clap and anyhow.

mod audit;
mod check;
mod demo;
mod fixes;
mod identity;
mod look;
mod out;
mod profile;
mod record;
mod trust;

use anyhow::Result;
use clap::{Args, Parser, Subcommand};
use std::path::PathBuf;

/// Exit code: the command ran and the answer is yes (or it did what was asked).
pub const EXIT_OK: i32 = 0;
/// Exit code: the command ran and found problems (`verify`).
pub const EXIT_FOUND: i32 = 1;
/// Exit code: usage or input error.
pub const EXIT_ERROR: i32 = 2;

#[derive(Parser, Debug)]
#[command(
    name = "emend",
    version,
    about = "Keep raw data extracts unchanged and every cleaning decision signed, explained and reversible",
    long_about = "emend keeps raw data extracts byte for byte, records each cleaning fix as a signed commit \
of cell-level edits with a reason, and rebuilds, exports and verifies any cleaned version.\n\n\
Start with 'emend demo' to see a worked example, or 'emend init' in a project folder.",
    after_help = "Environment: EMEND_HOME sets where your signing identity is kept (default: your config folder); \
EMEND_NOW fixes the time recorded in commits (RFC 3339, for reproducible runs); NO_COLOR turns colour off."
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Create a store in the current folder (.emend/store.sqlite)
    Init,
    /// Make or show your signing identity
    #[command(subcommand)]
    Id(IdCommand),
    /// Store a raw extract (CSV or TSV) as a new signed commit
    Ingest(record::IngestArgs),
    /// List the tables and their newest extracts
    Tables(JsonFlag),
    /// Print rows of a table version
    Show(look::ShowArgs),
    /// Find what needs cleaning: types, missing codes, outliers, spellings, suspect columns
    Profile(profile::ProfileArgs),
    /// Set one cell to a value (or to missing)
    #[command(allow_negative_numbers = true)]
    Set(fixes::SetArgs),
    /// Replace values across a column
    #[command(allow_negative_numbers = true)]
    Recode(fixes::RecodeArgs),
    /// Declare missing-value codes for a column; matching cells become missing
    #[command(allow_negative_numbers = true)]
    Missing(fixes::MissingArgs),
    /// Leave a row out of the cleaned data
    Exclude(fixes::ExcludeArgs),
    /// Mark a column as not to be trusted (export leaves it out)
    Distrust(fixes::DistrustArgs),
    /// Adopt a rules file for a table (a signed commit with a reason)
    Rules(check::RulesArgs),
    /// Apply the rules in force to a version; exit 1 when an error-level rule is broken
    Check(check::CheckArgs),
    /// List the fixes waiting to be committed
    Status(JsonFlag),
    /// Drop every pending fix
    Discard,
    /// Replay the fixes made on a table's previous extract onto its newest one
    Carry(record::CarryArgs),
    /// Sign and commit the pending fixes
    Commit(record::CommitArgs),
    /// List commits, newest last
    Log(look::LogArgs),
    /// Every changed cell, row and mark between two versions
    Diff(audit::DiffArgs),
    /// The life of one value (or row, or column): every fix, who, when, why
    Why(audit::WhyArgs),
    /// Name a commit with a signed tag
    Tag(audit::TagArgs),
    /// List tags
    Tags(JsonFlag),
    /// Write a table version as CSV (or the raw extract bytes)
    Export(look::ExportArgs),
    /// Write one self-contained HTML report of a version for an auditor
    Report(look::ReportArgs),
    /// Vouch for another signing key in a signed commit (key rotation, a new colleague)
    Trust(trust::TrustArgs),
    /// Check every hash, signature, table version and index row
    Verify(trust::VerifyArgs),
    /// Build a store from bundled demo data and record a cleaning pass
    Demo(demo::DemoArgs),
}

#[derive(Subcommand, Debug)]
enum IdCommand {
    /// Make a new Ed25519 signing identity
    New(identity::NewArgs),
    /// Show your identity and whether this store trusts it
    Show(JsonFlag),
}

#[derive(Args, Debug)]
struct JsonFlag {
    /// Print JSON (the shape is documented in docs/json.md)
    #[arg(long)]
    json: bool,
}

/// Shared options of every fix command.
#[derive(Args, Debug, Clone)]
pub struct FixMeta {
    /// Why this fix is right (required, recorded in the signed commit)
    #[arg(long, value_name = "REASON")]
    why: String,
    /// A file that backs the decision (stored content-addressed); may be repeated
    #[arg(long, value_name = "FILE")]
    evidence: Vec<PathBuf>,
    /// Who was consulted about it
    #[arg(long, value_name = "WHO")]
    consulted: Option<String>,
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
    match cli.command {
        Command::Init => record::init(),
        Command::Id(IdCommand::New(a)) => identity::new(a),
        Command::Id(IdCommand::Show(f)) => identity::show(f.json),
        Command::Ingest(a) => record::ingest(a),
        Command::Tables(f) => look::tables(f.json),
        Command::Show(a) => look::show(a),
        Command::Profile(a) => profile::run(a),
        Command::Set(a) => fixes::set(a),
        Command::Recode(a) => fixes::recode(a),
        Command::Missing(a) => fixes::missing(a),
        Command::Exclude(a) => fixes::exclude(a),
        Command::Distrust(a) => fixes::distrust(a),
        Command::Status(f) => record::status(f.json),
        Command::Discard => record::discard(),
        Command::Rules(a) => check::adopt(a),
        Command::Check(a) => check::check(a),
        Command::Carry(a) => record::carry(a),
        Command::Commit(a) => record::commit(a),
        Command::Log(a) => look::log(a),
        Command::Export(a) => look::export(a),
        Command::Diff(a) => audit::diff_cmd(a),
        Command::Why(a) => audit::why_cmd(a),
        Command::Tag(a) => audit::tag_cmd(a),
        Command::Tags(f) => audit::tags_cmd(f.json),
        Command::Verify(a) => trust::verify(a),
        Command::Trust(a) => trust::trust_key(a),
        Command::Report(a) => look::report(a),
        Command::Demo(a) => demo::run(a),
    }
}

/// The time to record: `EMEND_NOW` when set (for reproducible runs), else the clock, in UTC.
pub fn now() -> Result<String> {
    if let Ok(fixed) = std::env::var("EMEND_NOW") {
        let parsed = chrono::DateTime::parse_from_rfc3339(&fixed).map_err(|e| {
            anyhow::anyhow!(
                "EMEND_NOW='{fixed}' is not an RFC 3339 time ({e}); e.g. 2026-10-01T09:00:00Z"
            )
        })?;
        return Ok(parsed
            .with_timezone(&chrono::Utc)
            .format("%Y-%m-%dT%H:%M:%SZ")
            .to_string());
    }
    Ok(chrono::Utc::now().format("%Y-%m-%dT%H:%M:%SZ").to_string())
}

/// Open the store for the current folder.
pub fn open_store() -> Result<emend::store::Store> {
    let cwd = std::env::current_dir()?;
    Ok(emend::store::Store::discover(&cwd)?)
}
