//! `init` (make a store) and `ingest` (store a raw extract as a signed commit).

use super::out::{self, BAD, BOLD, DIM, GOOD, paint};
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
    /// The extract: a CSV or TSV file, or an .xlsx or .ods workbook (or a named pipe), kept
    /// byte for byte; '-' reads standard input. A file that changes while it is read is refused
    file: PathBuf,
    /// Table name (letters, digits, '_', '-', '.')
    #[arg(long, short = 't', required_unless_present = "sheets")]
    table: Option<String>,
    /// The workbook's sheet to ingest, by name (default: the first sheet)
    #[arg(long, value_name = "NAME", conflicts_with = "sheets")]
    sheet: Option<String>,
    /// Ingest every sheet of the workbook, each into a table named after it (characters other
    /// than letters, digits, '_', '-' and '.' become '_'), in one transaction
    #[arg(long, conflicts_with = "table")]
    sheets: bool,
    /// The workbook row (from 1) that holds the column names, when a title or several header
    /// rows sit above the table (default: the first filled row)
    #[arg(long, value_name = "N")]
    header_row: Option<u32>,
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
    /// Print JSON (the shape is documented in docs/json.md)
    #[arg(long)]
    json: bool,
}

/// A table name from a sheet name: every character a table name cannot hold becomes '_'.
fn table_of_sheet(sheet: &str) -> String {
    let mut name: String = sheet
        .trim()
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.') {
                c
            } else {
                '_'
            }
        })
        .collect();
    if !name.starts_with(|c: char| c.is_ascii_alphanumeric()) {
        name.insert(0, 's');
    }
    name.truncate(64);
    name
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

fn print_ingested(
    o: &mut impl Write,
    done: &ledger::CommitOutcome,
    outcome: &emend::ingest::IngestOutcome,
    secs: f64,
) -> Result<()> {
    let r = &outcome.record;
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
            "  skipped {} blank {} (kept in the raw bytes)",
            outcome.blank_lines,
            if outcome.notes.is_empty()
                && !matches!(r.dialect.encoding, emend::model::TextEncoding::Workbook(_))
            {
                "lines"
            } else {
                "rows"
            }
        )?;
    }
    for note in &outcome.notes {
        writeln!(o, "  {} {}", paint(BAD, "note:"), note.message)?;
    }
    Ok(())
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
        table: args.table.clone().unwrap_or_default(),
        key: args
            .key
            .iter()
            .map(|k| k.trim().to_string())
            .filter(|k| !k.is_empty())
            .collect(),
        delimiter: args.delimiter.as_deref().map(parse_delimiter).transpose()?,
        encoding,
        max_field: Some(cx.max_field()?),
        sheet: emend::ingest::SheetOptions {
            sheet: args.sheet.clone(),
            header_row: args.header_row,
        },
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
    let each: Vec<IngestOptions> = if args.sheets {
        let names = emend::ingest::sheet_names(&input)
            .with_context(|| format!("ingesting {}", args.file.display()))?;
        names
            .into_iter()
            .map(|name| IngestOptions {
                table: table_of_sheet(&name),
                sheet: emend::ingest::SheetOptions {
                    sheet: Some(name),
                    header_row: args.header_row,
                },
                ..opts.clone()
            })
            .collect()
    } else {
        vec![opts]
    };
    let done = ledger::ingest_each(
        &mut store,
        &mut input,
        &each,
        args.message.as_deref().unwrap_or(""),
        &ctx,
    )
    .with_context(|| format!("ingesting {}", args.file.display()))?;
    let secs = started.elapsed().as_secs_f64();
    if args.json {
        let list: Vec<serde_json::Value> = done
            .iter()
            .map(|(c, outcome)| {
                let r = &outcome.record;
                serde_json::json!({
                    "commit": c.id.to_string(),
                    "seq": c.seq,
                    "table": r.table,
                    "file": r.file_name,
                    "format": r.dialect.encoding.name(),
                    "sheet": each.iter().find(|o| o.table == r.table).and_then(|o| o.sheet.sheet.clone()),
                    "rows": r.n_rows,
                    "columns": r.header,
                    "key": r.key,
                    "extract": r.extract.to_string(),
                    "bytes": r.n_bytes,
                    "new_bytes": outcome.new_bytes,
                    "blank_rows_skipped": outcome.blank_lines,
                    "version": outcome.version.to_string(),
                    "notes": outcome.notes.iter().map(|n| serde_json::json!({
                        "kind": n.kind, "count": n.count, "message": n.message,
                    })).collect::<Vec<_>>(),
                })
            })
            .collect();
        let value = if args.sheets {
            serde_json::Value::Array(list)
        } else {
            list.into_iter().next().unwrap_or_default()
        };
        out::json(&value)?;
        return Ok(0);
    }
    let mut o = out::stdout();
    for (done, outcome) in &done {
        print_ingested(&mut o, done, outcome, secs)?;
    }
    Ok(0)
}
