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
    /// Output file (default: standard output); written whole or not at all
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
}

/// Writes to a temporary file beside the target and renames it into place on success.
struct AtomicFile {
    tmp: PathBuf,
    target: PathBuf,
    file: Option<std::io::BufWriter<std::fs::File>>,
}

impl AtomicFile {
    fn create(target: &std::path::Path) -> Result<Self> {
        if target.is_dir() {
            bail!("{} is a folder; give a file name with -o", target.display());
        }
        let dir = target
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(std::path::Path::new("."));
        let name = target
            .file_name()
            .context("-o needs a file name")?
            .to_string_lossy();
        let tmp = dir.join(format!(".{name}.emend-{}.tmp", std::process::id()));
        let file = std::fs::File::create(&tmp).with_context(|| {
            format!(
                "cannot write {} (its folder must exist and be writable)",
                target.display()
            )
        })?;
        Ok(AtomicFile {
            tmp,
            target: target.to_path_buf(),
            file: Some(std::io::BufWriter::with_capacity(1 << 20, file)),
        })
    }

    fn finish(mut self) -> Result<()> {
        let f = self.file.take().expect("finish is called once");
        let file = f.into_inner().map_err(|e| e.into_error())?;
        file.sync_all()?;
        std::fs::rename(&self.tmp, &self.target)
            .with_context(|| format!("writing {}", self.target.display()))?;
        Ok(())
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.file.as_mut().expect("open until finish").write(buf)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        self.file.as_mut().expect("open until finish").flush()
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.file.is_some() {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

pub fn export(cx: &CliContext, a: ExportArgs) -> Result<i32> {
    let store = cx.store()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    let v = query::version_at(&reader, &a.table, rev)?;
    let opts = ExportOptions {
        na: a.na.clone(),
        with_excluded: a.with_excluded,
        with_distrusted: a.with_distrusted,
        notes: a.notes,
    };
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
    let side_files = a.codebook.is_some() || a.provenance.is_some() || a.decisions.is_some();
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
        Some(path) => {
            let mut f = AtomicFile::create(path)?;
            let what = run(&mut f)?;
            f.finish()?;
            writeln!(anstream::stderr(), "wrote {what} to {}", path.display())?;
        }
        // With only side files asked for, the CSV itself is not printed.
        None if side_files => {}
        None => {
            let stdout = std::io::stdout();
            let mut w = std::io::BufWriter::with_capacity(1 << 16, stdout.lock());
            run(&mut w)?;
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
            anstream::stderr(),
            "wrote CSVW metadata for {csv_url} to {}",
            path.display()
        )?;
    }
    if let Some(path) = &a.provenance {
        let view = emend::views::audit::prov_view(&reader, &v.table, upto)?;
        write_json_file(path, &emend::report::prov_json(&view))?;
        writeln!(
            anstream::stderr(),
            "wrote PROV-JSON lineage ({} commits) to {}",
            view.commits.len(),
            path.display()
        )?;
    }
    if let Some(path) = &a.decisions {
        let rows = emend::views::audit::decision_rows(&reader, &v.table, v.ingest_seq, upto)?;
        let mut f = AtomicFile::create(path)?;
        emend::report::write_decisions_csv(&rows, &mut f)?;
        f.finish()?;
        writeln!(
            anstream::stderr(),
            "wrote {} decisions to {}",
            rows.len(),
            path.display()
        )?;
    }
    Ok(0)
}

fn write_json_file(path: &std::path::Path, value: &serde_json::Value) -> Result<()> {
    let mut f = AtomicFile::create(path)?;
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
    /// The HTML file to write (one self-contained file)
    #[arg(
        short = 'o',
        long = "output",
        value_name = "FILE.html",
        required = true
    )]
    output: PathBuf,
}

pub fn report(cx: &CliContext, a: ReportArgs) -> Result<i32> {
    let store = cx.store()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    query::version_at(&reader, &a.table, rev)?;
    let started = std::time::Instant::now();
    let verify =
        emend::query::verify::verify(&reader, &emend::query::verify::Trust::Store, &mut |_| {})?;
    let mut view = emend::views::audit::report_view(&reader, &a.table, rev, &verify, &cx.now()?)?;
    if let Some(id) = cx.try_identity()? {
        let name = match &id.email {
            Some(e) => format!("{} <{e}>", id.name),
            None => id.name.clone(),
        };
        view.verify.receipt =
            Some(emend::query::receipt::make(&reader, &id.signer, &name, &cx.now()?)?.text());
    }
    let mut f = AtomicFile::create(&a.output)?;
    emend::report::render_html(&view, &mut f)?;
    f.finish()?;
    let size = std::fs::metadata(&a.output).map(|m| m.len()).unwrap_or(0);
    writeln!(
        out::stdout(),
        "wrote the report of {} at {} to {} ({} bytes, {} commits, {} columns; store {}) in {:.2} s",
        a.table,
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
    /// Write the file here (default: standard output)
    #[arg(short = 'o', long = "output", value_name = "FILE")]
    output: Option<PathBuf>,
}

/// Writes a stored evidence file back out, checked against its hash.
pub fn evidence(cx: &CliContext, a: EvidenceArgs) -> Result<i32> {
    let store = cx.store()?;
    let reader = store.read();
    let e = emend::views::export::find_evidence(&reader, &a.hash)?;
    match &a.output {
        Some(path) => {
            let mut f = AtomicFile::create(path)?;
            let n = emend::views::export::export_blob_checked(&reader, &e.blob, &mut f)?;
            f.finish()?;
            eprintln!(
                "wrote {} ({n} bytes, {}) to {}; its hash checks out",
                e.name,
                e.blob.short(),
                path.display()
            );
        }
        None => {
            let stdout = std::io::stdout();
            let mut lock = stdout.lock();
            emend::views::export::export_blob_checked(&reader, &e.blob, &mut lock)?;
        }
    }
    Ok(0)
}
