//! Commands that write a version to files: `export` (CSV, raw bytes, codebook, provenance,
//! decisions) and `report` (the self-contained HTML audit report).

use super::out::{self};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::query::{self};
use emend::views::export::{ExportOptions, export_raw, export_version};
use std::io::Write;
use std::path::PathBuf;

use super::context::CliContext;
use super::show::rev_label;

#[derive(Args, Debug)]
pub struct ExportArgs {
    /// Table
    table: String,
    /// Revision: commit number, tag, 8+ hex digits of an id, 'latest' (default) or 'raw'
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// Write the extract's bytes exactly as ingested, without fixes
    #[arg(long, conflicts_with_all = ["na", "with_excluded", "with_distrusted"])]
    raw: bool,
    /// Output file (default, or '-': standard output); a regular file is written whole or not
    /// at all (a temporary file beside it, renamed into place; a symbolic link at FILE is
    /// replaced, never written through); a device or FIFO is written directly
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    output: Option<PathBuf>,
    /// Text for missing and blank cells (default: empty)
    #[arg(long, value_name = "TEXT")]
    na: Option<String>,
    /// Keep excluded rows
    #[arg(long)]
    with_excluded: bool,
    /// Keep distrusted columns
    #[arg(long)]
    with_distrusted: bool,
    /// Add a last column, emend_notes, with the notes for review on each row
    #[arg(long, conflicts_with = "raw")]
    notes: bool,
    /// Also write W3C CSVW metadata for the exported CSV to FILE (e.g. samples.csv-metadata.json)
    #[arg(long, value_name = "FILE")]
    codebook: Option<PathBuf>,
    /// Also write W3C PROV-JSON lineage of the version to FILE
    #[arg(long, value_name = "FILE")]
    provenance: Option<PathBuf>,
    /// Also write one CSV row per cell edit, and per row excluded, kept or noted (row, column,
    /// old, new, fix, reason, ...) to FILE
    #[arg(long, value_name = "FILE")]
    decisions: Option<PathBuf>,
    /// Put an apostrophe before each cell that a spreadsheet would run as a formula (it starts
    /// with =, +, -, @, tab or carriage return and is not a number), in the CSV and the
    /// --decisions file. The output is then no longer the exact data: use it only for files
    /// that people open in a spreadsheet. Without it, such cells are written as they are and
    /// counted in a warning
    #[arg(long, conflicts_with = "raw")]
    spreadsheet_safe: bool,
    /// Also write a workbook for reviewers to FILE (.xlsx): the version with every changed,
    /// kept or noted cell filled and noted with its fix, reason, signer and commit; a second
    /// sheet with every decision (as --decisions); columns typed as the profile types them
    #[arg(long, value_name = "FILE", conflicts_with = "raw")]
    xlsx: Option<PathBuf>,
    /// With --xlsx, a third sheet with the raw and new value of every changed cell
    #[arg(long, requires = "xlsx")]
    raw_values: bool,
}

/// Where a command writes a file it was asked for with `-o FILE` (or `--codebook FILE`, ...).
///
/// - A regular file (or a name that does not exist yet) is written to a fresh temporary file
///   beside it, made with an exclusive, unpredictable name (`tempfile::NamedTempFile`, which
///   never follows a symbolic link planted at that name), then renamed into place: the target
///   is written whole or not at all.
/// - A symbolic link at FILE is replaced by the new file (rename replaces the link itself);
///   the file the link pointed to is left untouched. A link planted in a shared folder can
///   then never make emend overwrite another file.
/// - A target that exists and is not a regular file (a terminal, `/dev/null`, a FIFO, a
///   socket), or any path under `/dev/` or `/proc/` (such as `/dev/stdout`), is opened and
///   written directly, never replaced.
/// - `-` is standard output.
pub(super) enum OutputFile {
    /// A temporary file renamed over `target` by [`OutputFile::finish`].
    Replace {
        tmp: std::io::BufWriter<tempfile::NamedTempFile>,
        target: PathBuf,
    },
    /// A device, FIFO or other special file, written in place.
    Direct(std::io::BufWriter<std::fs::File>),
    /// Standard output (`-`).
    Stdout(Box<dyn Write>),
}

impl OutputFile {
    pub(super) fn create(target: &std::path::Path) -> Result<Self> {
        if target.as_os_str() == "-" {
            return Ok(OutputFile::Stdout(out::data_stdout()));
        }
        let cannot = || {
            format!(
                "cannot write {} (its folder must exist and be writable)",
                target.display()
            )
        };
        let special_place = target.starts_with("/dev") || target.starts_with("/proc");
        match std::fs::metadata(target) {
            Ok(m) if m.is_dir() => {
                bail!("{} is a folder; give a file name with -o", target.display())
            }
            Ok(m) if !m.is_file() || special_place => {
                let file = std::fs::OpenOptions::new()
                    .write(true)
                    .truncate(m.is_file())
                    .open(target)
                    .with_context(cannot)?;
                return Ok(OutputFile::Direct(std::io::BufWriter::with_capacity(
                    1 << 16,
                    file,
                )));
            }
            _ => {}
        }
        let dir = target
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(std::path::Path::new("."));
        let name = target
            .file_name()
            .context("-o needs a file name")?
            .to_string_lossy();
        let tmp = tempfile::Builder::new()
            .prefix(&format!(".{name}.emend-"))
            .suffix(".tmp")
            .tempfile_in(dir)
            .with_context(cannot)?;
        Ok(OutputFile::Replace {
            tmp: std::io::BufWriter::with_capacity(1 << 20, tmp),
            target: target.to_path_buf(),
        })
    }

    pub(super) fn finish(self) -> Result<()> {
        match self {
            OutputFile::Replace { tmp, target } => {
                let tmp = tmp.into_inner().map_err(|e| e.into_error())?;
                tmp.as_file().sync_all()?;
                // A new file gets the usual permissions (0666 less the umask), as a file the
                // shell creates with `>` would, rather than the temporary file's 0600.
                #[cfg(unix)]
                {
                    use std::os::unix::fs::PermissionsExt;
                    let mode = match std::fs::metadata(&target) {
                        Ok(m) if m.is_file() => m.permissions().mode() & 0o7777,
                        _ => 0o666 & !current_umask(),
                    };
                    tmp.as_file()
                        .set_permissions(std::fs::Permissions::from_mode(mode))?;
                }
                tmp.persist(&target)
                    .map_err(|e| e.error)
                    .with_context(|| format!("writing {}", target.display()))?;
                Ok(())
            }
            OutputFile::Direct(mut f) => {
                f.flush()?;
                Ok(())
            }
            OutputFile::Stdout(mut w) => {
                w.flush()?;
                Ok(())
            }
        }
    }
}

/// The process umask, read from `/proc/self/status` (Linux); 0o022 when it cannot be read.
#[cfg(unix)]
fn current_umask() -> u32 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find_map(|l| l.strip_prefix("Umask:"))
                .and_then(|v| u32::from_str_radix(v.trim(), 8).ok())
        })
        .unwrap_or(0o022)
}

impl Write for OutputFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        match self {
            OutputFile::Replace { tmp, .. } => tmp.write(buf),
            OutputFile::Direct(f) => f.write(buf),
            OutputFile::Stdout(w) => w.write(buf),
        }
    }
    fn flush(&mut self) -> std::io::Result<()> {
        match self {
            OutputFile::Replace { tmp, .. } => tmp.flush(),
            OutputFile::Direct(f) => f.flush(),
            OutputFile::Stdout(w) => w.flush(),
        }
    }
}

/// After writing a CSV: say how many cells a spreadsheet would run as formulas, and the option
/// that defuses them, on standard error.
pub(super) fn warn_formulas(n: u64, defused: bool) -> Result<()> {
    if n == 0 {
        return Ok(());
    }
    let cells = emend::model::quantity(n, "cell", "cells");
    if defused {
        writeln!(
            out::stderr(),
            "{cells} that a spreadsheet would run as formulas got a leading apostrophe (--spreadsheet-safe)"
        )?;
    } else {
        writeln!(
            out::stderr(),
            "warning: {cells} start with =, +, -, @, tab or carriage return and are not numbers: a spreadsheet may run them as formulas; --spreadsheet-safe defuses them with a leading apostrophe"
        )?;
    }
    Ok(())
}

#[cfg(feature = "xlsx")]
fn write_xlsx(
    reader: &emend::store::Reader<'_>,
    v: &emend::query::Version,
    upto: u64,
    a: &ExportArgs,
    path: &std::path::Path,
) -> Result<()> {
    let rows = emend::views::audit::decision_rows(reader, &v.table, v.ingest_seq, upto)?;
    let opts = emend::views::xlsx::XlsxOptions {
        with_excluded: a.with_excluded,
        with_distrusted: a.with_distrusted,
        raw_values: a.raw_values,
    };
    let (bytes, done) = emend::views::xlsx::export_xlsx(reader, v, &rows, &opts)?;
    let mut f = OutputFile::create(path)?;
    f.write_all(&bytes)?;
    f.finish()?;
    writeln!(
        out::stderr(),
        "wrote a review workbook of {} rows × {} columns ({} cells marked, {} decisions) to {}",
        done.n_rows,
        done.n_columns,
        done.n_marked,
        done.n_decisions,
        path.display()
    )?;
    Ok(())
}

#[cfg(not(feature = "xlsx"))]
fn write_xlsx(
    _reader: &emend::store::Reader<'_>,
    _v: &emend::query::Version,
    _upto: u64,
    _a: &ExportArgs,
    _path: &std::path::Path,
) -> Result<()> {
    bail!("this build of emend writes no workbooks (built without the 'xlsx' feature)")
}

pub fn export(cx: &CliContext, a: ExportArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    let v = query::version_at(&reader, &a.table, rev)?;
    let opts = ExportOptions {
        na: a.na.clone(),
        with_excluded: a.with_excluded,
        with_distrusted: a.with_distrusted,
        notes: a.notes,
        spreadsheet_safe: a.spreadsheet_safe,
    };
    let n_formulas = std::cell::Cell::new(0u64);
    let run = |w: &mut dyn Write| -> Result<String> {
        if a.raw {
            let n = export_raw(&reader, &v.def.extract, w)?;
            Ok(format!(
                "raw extract {} ({} bytes, {})",
                v.def.file_name,
                n,
                v.def.extract.short()
            ))
        } else {
            let done = export_version(&reader, &v, &opts, w)?;
            n_formulas.set(n_formulas.get() + done.n_formulas);
            Ok(format!(
                "{} rows × {} columns of {} at {} ({} excluded rows left out)",
                done.n_rows,
                done.n_columns,
                v.table,
                rev_label(&rev),
                done.n_left_out
            ))
        }
    };
    let side_files =
        a.codebook.is_some() || a.provenance.is_some() || a.decisions.is_some() || a.xlsx.is_some();
    // A codebook describes a CSV file: without -o, that file is written beside it, under the
    // name the codebook gives it.
    let beside = match (&a.output, &a.codebook) {
        (None, Some(cb)) => {
            let p = cb
                .parent()
                .unwrap_or_else(|| std::path::Path::new(""))
                .join(format!("{}.csv", v.table));
            if p.exists() {
                anyhow::bail!(
                    "--codebook describes {}, which exists; give -o FILE for the CSV it describes",
                    p.display()
                );
            }
            Some(p)
        }
        _ => None,
    };
    match a.output.as_ref().or(beside.as_ref()) {
        Some(path) if path.as_os_str() != "-" => {
            let mut f = OutputFile::create(path)?;
            let what = run(&mut f)?;
            f.finish()?;
            writeln!(out::stderr(), "wrote {what} to {}", path.display())?;
        }
        // With only side files asked for, the CSV itself is not printed.
        None if side_files => {}
        _ => {
            // Exact bytes to a pipe or a file; escaped only on a terminal.
            let mut w = out::data_stdout();
            run(&mut *w)?;
            w.flush()?;
        }
    }
    let upto = if rev.raw { v.ingest_seq } else { rev.seq };
    if let Some(path) = &a.codebook {
        let csv_url = a
            .output
            .as_ref()
            .or(beside.as_ref())
            .and_then(|p| p.file_name())
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| format!("{}.csv", v.table));
        let view = emend::views::audit::codebook_view(&reader, &v, &csv_url, a.with_distrusted)?;
        write_json_file(path, &emend::report::csvw_metadata(&view))?;
        writeln!(
            out::stderr(),
            "wrote CSVW metadata for {csv_url} to {}",
            path.display()
        )?;
    }
    if let Some(path) = &a.provenance {
        let view = emend::views::audit::prov_view(&reader, &v.table, upto)?;
        write_json_file(path, &emend::report::prov_json(&view))?;
        writeln!(
            out::stderr(),
            "wrote PROV-JSON lineage ({} commits) to {}",
            view.commits.len(),
            path.display()
        )?;
    }
    if let Some(path) = &a.decisions {
        let rows = emend::views::audit::decision_rows(&reader, &v.table, v.ingest_seq, upto)?;
        let mut f = OutputFile::create(path)?;
        let n = emend::report::write_decisions_csv_with(&rows, a.spreadsheet_safe, &mut f)?;
        n_formulas.set(n_formulas.get() + n);
        f.finish()?;
        writeln!(
            out::stderr(),
            "wrote {} decisions to {}",
            rows.len(),
            path.display()
        )?;
    }
    if let Some(path) = &a.xlsx {
        write_xlsx(&reader, &v, upto, &a, path)?;
    }
    warn_formulas(n_formulas.get(), a.spreadsheet_safe)?;
    Ok(0)
}

fn write_json_file(path: &std::path::Path, value: &serde_json::Value) -> Result<()> {
    let mut f = OutputFile::create(path)?;
    serde_json::to_writer_pretty(&mut f, value)?;
    writeln!(f)?;
    f.finish()
}

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Table
    table: String,
    /// Revision: commit number, tag, 8+ hex digits, 'latest' (default) or 'raw'
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// The HTML file to write (one self-contained file), as export -o writes files; '-' is
    /// standard output
    #[arg(
        short = 'o',
        long = "output",
        value_name = "FILE.html",
        required = true
    )]
    output: PathBuf,
}

pub fn report(cx: &CliContext, a: ReportArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    query::version_at(&reader, &a.table, rev)?;
    let started = std::time::Instant::now();
    let verify =
        emend::query::verify::verify(&reader, &emend::query::verify::Trust::Store, &mut |_| {})?;
    let mut view = emend::views::audit::report_view(&reader, &a.table, rev, &verify, &cx.now()?)?;
    if let Some(id) = cx.try_identity()? {
        view.verify.receipt = Some(super::receipt::signed_by(cx, &reader, &id)?.text());
    }
    let mut f = OutputFile::create(&a.output)?;
    emend::report::render_html(&view, &mut f)?;
    f.finish()?;
    let size = std::fs::metadata(&a.output).map(|m| m.len()).unwrap_or(0);
    // With the report itself on standard output, the summary goes to standard error.
    let mut summary: Box<dyn Write> = if a.output.as_os_str() == "-" {
        Box::new(out::stderr())
    } else {
        Box::new(out::stdout())
    };
    writeln!(
        summary,
        "wrote the report of {} at {} to {} ({} bytes, {} commits, {} columns; store {}) in {:.2} s",
        out::clean(&a.table),
        view.version.label,
        a.output.display(),
        size,
        view.commits.len(),
        view.columns.len(),
        if verify.is_clean() {
            "intact"
        } else {
            "NOT INTACT"
        },
        started.elapsed().as_secs_f64()
    )?;
    Ok(0)
}

#[derive(clap::Args, Debug)]
pub struct EvidenceArgs {
    /// The first hex digits (6 or more) of the file's hash, as 'emend why' shows it
    hash: String,
    /// Write the file here (default, or '-': standard output), as export -o writes files
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    output: Option<PathBuf>,
}

/// Writes a stored evidence file back out, checked against its hash.
pub fn evidence(cx: &CliContext, a: EvidenceArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let e = emend::views::export::find_evidence(&reader, &a.hash)?;
    match &a.output {
        Some(path) if path.as_os_str() != "-" => {
            let mut f = OutputFile::create(path)?;
            let n = emend::views::export::export_blob_checked(&reader, &e.blob, &mut f)?;
            f.finish()?;
            writeln!(
                out::stderr(),
                "wrote {} ({n} bytes, {}) to {}; its hash checks out",
                out::clean(&e.name),
                e.blob.short(),
                path.display()
            )?;
        }
        _ => {
            let mut w = out::data_stdout();
            emend::views::export::export_blob_checked(&reader, &e.blob, &mut *w)?;
            w.flush()?;
        }
    }
    Ok(0)
}
