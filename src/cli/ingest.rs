//! `init` (make a store) and `ingest` (store a raw extract as a signed commit).

use super::out::{self, BOLD, DIM, GOOD, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::ingest::IngestOptions;
use emend::ledger;
use emend::model::TextEncoding;
use emend::signing::fingerprint;
use std::io::Write;
use std::path::{Path, PathBuf};

use super::context::CliContext;

/// What errors and the commit call standard input when the extract is '-'.
const STDIN_NAME: &str = "<stdin>";

#[derive(Args, Debug)]
pub struct IngestArgs {
    /// The extract: a CSV or TSV file (or a named pipe), kept byte for byte; '-' reads standard
    /// input. A file that changes while it is read is refused
    file: PathBuf,
    /// Table name (letters, digits, '_', '-', '.')
    #[arg(long, short = 't')]
    table: String,
    /// Key column(s) that name each row, comma-separated; without a key rows are named by
    /// position. A later extract of a table reuses its key
    #[arg(long, value_delimiter = ',')]
    key: Vec<String>,
    /// Field delimiter (one character, or 'tab'); guessed when not given
    #[arg(long)]
    delimiter: Option<String>,
    /// Text encoding: utf-8 (default), windows-1252 or latin-1
    #[arg(long)]
    encoding: Option<String>,
    /// Commit message
    #[arg(long, short = 'm')]
    message: Option<String>,
}

pub fn init(cx: &CliContext) -> Result<i32> {
    let cwd = cx.cwd().to_path_buf();
    let now = cx.now()?;
    let mut store = emend::store::Store::init(&cwd, &now)?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} this folder's history begins: {} holds every extract and decision from now on",
        paint(GOOD, "ready:"),
        store.path().display()
    )?;
    match cx.try_identity()? {
        Some(id) => {
            let key = id.signer.public_key();
            ledger::trust(&mut store, &key, &id.name, id.email.as_deref(), &now)?;
            writeln!(
                o,
                "  trusts {} (key {})",
                paint(BOLD, &id.name),
                fingerprint(&key)
            )?;
        }
        None => {
            writeln!(
                o,
                "  no signing identity yet: make one with 'emend id new --name \"Your Name\"'; the first key to commit here becomes trusted"
            )?;
        }
    }
    writeln!(o, "  next: emend ingest FILE --table NAME --key COLUMN")?;
    Ok(0)
}

fn parse_delimiter(text: &str) -> Result<u8> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        t if t.len() == 1 && t.is_ascii() && !matches!(t, "\"" | "\n" | "\r") => {
            Ok(t.as_bytes()[0])
        }
        _ => bail!(
            "--delimiter must be one ASCII character other than a quote or line end, or 'tab' (got '{text}')"
        ),
    }
}

pub fn ingest(cx: &CliContext, args: IngestArgs) -> Result<i32> {
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let encoding = match &args.encoding {
        None => None,
        Some(e) => Some(TextEncoding::parse(e).with_context(|| {
            format!("unknown --encoding '{e}': use utf-8, windows-1252 or latin-1")
        })?),
    };
    let opts = IngestOptions {
        table: args.table.clone(),
        key: args
            .key
            .iter()
            .map(|k| k.trim().to_string())
            .filter(|k| !k.is_empty())
            .collect(),
        delimiter: args.delimiter.as_deref().map(parse_delimiter).transpose()?,
        encoding,
        max_field: Some(cx.max_field()?),
    };
    let started = std::time::Instant::now();
    let ctx = id.context(cx.now()?);
    // Read once, through one handle; a pipe (and standard input) is first copied to a private
    // file beside the store, before the write lock is taken.
    let spool = ledger::spool_beside(&store);
    let mut input = if args.file.as_os_str() == "-" {
        emend::ingest::Input::spool(Path::new(STDIN_NAME), std::io::stdin().lock(), &spool)
    } else {
        emend::ingest::Input::open(&args.file, &spool)
    }
    .with_context(|| format!("ingesting {}", args.file.display()))?;
    let (done, outcome) = ledger::ingest_input(
        &mut store,
        &mut input,
        &opts,
        args.message.as_deref().unwrap_or(""),
        &ctx,
    )
    .with_context(|| format!("ingesting {}", args.file.display()))?;
    let secs = started.elapsed().as_secs_f64();
    let r = &outcome.record;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} {} as commit {} {}",
        paint(GOOD, "ingested"),
        paint(BOLD, &r.file_name),
        done.seq,
        paint(DIM, done.id.short())
    )?;
    writeln!(
        o,
        "  table {}: {} rows × {} columns, key {}",
        paint(BOLD, &r.table),
        r.n_rows,
        r.header.len(),
        if r.key.is_empty() {
            "none (rows named by position)".to_string()
        } else {
            r.key.join(", ")
        }
    )?;
    writeln!(
        o,
        "  extract {} ({} bytes; {} new compressed bytes stored) in {:.2} s",
        r.extract.short(),
        r.n_bytes,
        outcome.new_bytes,
        secs
    )?;
    if outcome.blank_lines > 0 {
        writeln!(
            o,
            "  skipped {} blank lines (kept in the raw bytes)",
            outcome.blank_lines
        )?;
    }
    Ok(0)
}
