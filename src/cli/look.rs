//! Read-only commands: tables, show, log, export.

use super::out::{self, BOLD, CHANGED, DIM, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::history::export::{ExportOptions, export_raw, export_version};
use emend::history::{self, Rev};
use emend::model::{Change, CommitBody};
use emend::signing::fingerprint;
use std::io::Write;
use std::ops::ControlFlow;
use std::path::PathBuf;

#[derive(Args, Debug)]
pub struct ShowArgs {
    /// Table
    table: String,
    /// Revision: commit number, 8+ hex digits of an id, 'latest' (default) or 'raw'
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// Rows by 1-based position, e.g. 1-20 or 41
    #[arg(long, default_value = "1-20", value_name = "A-B")]
    rows: String,
    /// Only these columns, comma-separated
    #[arg(long, value_delimiter = ',', value_name = "COLS")]
    cols: Vec<String>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

#[derive(Args, Debug)]
pub struct LogArgs {
    /// Only commits that change this table
    table: Option<String>,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

#[derive(Args, Debug)]
pub struct ExportArgs {
    /// Table
    table: String,
    /// Revision: commit number, 8+ hex digits of an id, 'latest' (default) or 'raw'
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
    /// Also write W3C CSVW metadata for the exported CSV to FILE (e.g. samples.csv-metadata.json)
    #[arg(long, value_name = "FILE")]
    codebook: Option<PathBuf>,
    /// Also write W3C PROV-JSON lineage of the version to FILE
    #[arg(long, value_name = "FILE")]
    provenance: Option<PathBuf>,
    /// Also write one CSV row per cell edit (row, column, old, new, fix, reason, ...) to FILE
    #[arg(long, value_name = "FILE")]
    decisions: Option<PathBuf>,
}

fn parse_rows(text: &str) -> Result<(u64, u64)> {
    let bad = || {
        anyhow::anyhow!("--rows takes A-B or N with 1-based positions, e.g. 1-20 (got '{text}')")
    };
    let (a, b) = match text.split_once('-') {
        Some((a, b)) => (
            a.trim().parse::<u64>().map_err(|_| bad())?,
            b.trim().parse::<u64>().map_err(|_| bad())?,
        ),
        None => {
            let n = text.trim().parse::<u64>().map_err(|_| bad())?;
            (n, n)
        }
    };
    if a == 0 || b < a {
        return Err(bad());
    }
    Ok((a, b))
}

fn rev_label(rev: &Rev) -> String {
    if rev.raw {
        "raw".into()
    } else {
        format!("commit {}", rev.seq)
    }
}

pub fn tables(json: bool) -> Result<i32> {
    let store = super::open_store()?;
    let reader = store.read();
    let head = reader.head()?.map(|(s, _)| s).unwrap_or(0);
    let mut list = Vec::new();
    for name in reader.table_names()? {
        let v = history::version_at(
            &reader,
            &name,
            Rev {
                seq: head,
                raw: false,
            },
        )?;
        let n_extracts = reader.extracts_of(&name)?.len();
        list.push((name, v, n_extracts));
    }
    if json {
        let items: Vec<serde_json::Value> = list
            .iter()
            .map(|(name, v, n)| {
                serde_json::json!({
                    "table": name,
                    "rows": v.def.n_rows,
                    "columns": v.def.header,
                    "key": v.def.key,
                    "extract": v.def.extract.to_hex(),
                    "extract_file": v.def.file_name,
                    "extract_commit": v.ingest_seq,
                    "extracts": n,
                    "edited_cells": v.n_edited(),
                    "excluded_rows": v.n_excluded(),
                    "distrusted_columns": v.header().iter().enumerate().filter(|(i, _)| v.is_distrusted(*i)).map(|(_, h)| h.clone()).collect::<Vec<_>>(),
                })
            })
            .collect();
        out::json(&serde_json::json!({ "tables": items }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    if list.is_empty() {
        writeln!(o, "no tables yet: emend ingest FILE --table NAME")?;
        return Ok(0);
    }
    let header: Vec<String> = [
        "table",
        "rows",
        "cols",
        "key",
        "extract",
        "edited cells",
        "excluded",
        "distrusted",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let rows: Vec<Vec<(String, Option<anstyle::Style>)>> = list
        .iter()
        .map(|(name, v, n)| {
            let distrusted = (0..v.header().len())
                .filter(|&i| v.is_distrusted(i))
                .count();
            vec![
                (name.clone(), Some(BOLD)),
                (v.def.n_rows.to_string(), None),
                (v.header().len().to_string(), None),
                (
                    if v.def.key.is_empty() {
                        "(position)".into()
                    } else {
                        v.def.key.join(",")
                    },
                    None,
                ),
                (
                    format!(
                        "{} ({}, commit {}, {} in all)",
                        v.def.file_name,
                        v.def.extract.short(),
                        v.ingest_seq,
                        n
                    ),
                    None,
                ),
                (v.n_edited().to_string(), None),
                (v.n_excluded().to_string(), None),
                (distrusted.to_string(), None),
            ]
        })
        .collect();
    write!(o, "{}", out::table(&header, &rows, 60))?;
    Ok(0)
}

pub fn show(a: ShowArgs) -> Result<i32> {
    let store = super::open_store()?;
    let reader = store.read();
    let rev = history::resolve(&reader, &a.at)?;
    let v = history::version_at(&reader, &a.table, rev)?;
    let (from, to) = parse_rows(&a.rows)?;
    let cols: Vec<usize> = if a.cols.is_empty() {
        (0..v.header().len()).collect()
    } else {
        a.cols
            .iter()
            .map(|c| v.col_idx(c.trim()))
            .collect::<emend::Result<_>>()?
    };
    let mut picked = Vec::new();
    v.for_each_row(&reader, |row| {
        if row.pos > to {
            return Ok(ControlFlow::Break(()));
        }
        if row.pos >= from {
            let edited: Vec<bool> = cols.iter().map(|&c| v.is_edited(row.id, c)).collect();
            picked.push((
                row.pos,
                row.id.clone(),
                row.excluded,
                cols.iter()
                    .map(|&c| row.cells[c].clone())
                    .collect::<Vec<_>>(),
                edited,
            ));
        }
        Ok(ControlFlow::Continue(()))
    })?;
    if a.json {
        let rows: Vec<serde_json::Value> = picked
            .iter()
            .map(|(pos, id, ex, cells, _)| serde_json::json!({"position": pos, "row": id.to_string(), "excluded": ex, "cells": cells}))
            .collect();
        out::json(&serde_json::json!({
            "table": v.table,
            "revision": {"seq": rev.seq, "raw": rev.raw},
            "columns": cols.iter().map(|&c| v.header()[c].clone()).collect::<Vec<_>>(),
            "distrusted": cols.iter().map(|&c| v.is_distrusted(c)).collect::<Vec<_>>(),
            "rows": rows,
        }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    writeln!(
        o,
        "{} at {} — rows {}-{} of {}",
        paint(BOLD, &v.table),
        rev_label(&rev),
        from,
        to.min(v.def.n_rows),
        v.def.n_rows
    )?;
    let mut header = vec!["#".to_string()];
    header.extend(cols.iter().map(|&c| {
        if v.is_distrusted(c) {
            format!("{} (distrusted)", v.header()[c])
        } else {
            v.header()[c].clone()
        }
    }));
    let rows: Vec<Vec<(String, Option<anstyle::Style>)>> = picked
        .iter()
        .map(|(pos, _, excluded, cells, edited)| {
            let mut r = vec![(
                if *excluded {
                    format!("{pos} excluded")
                } else {
                    pos.to_string()
                },
                Some(DIM),
            )];
            for (c, e) in cells.iter().zip(edited) {
                let style = if *excluded || c.is_none() {
                    Some(DIM)
                } else if *e {
                    Some(CHANGED)
                } else {
                    None
                };
                r.push((out::cell(c), style));
            }
            r
        })
        .collect();
    write!(o, "{}", out::table(&header, &rows, 32))?;
    if picked.is_empty() {
        writeln!(o, "(no rows in that range)")?;
    }
    Ok(0)
}

/// One line summarising what a commit records.
pub fn summary(body: &CommitBody) -> String {
    match &body.change {
        Change::Ingest(r) => format!(
            "ingest {} into {}: {} rows × {} columns",
            r.file_name,
            r.table,
            r.n_rows,
            r.header.len()
        ),
        Change::Tag(t) => format!("tag {} on commit {}", t.name, t.target_seq),
        Change::Trust(t) => format!("trust key {} ({}): {}", fingerprint(&t.key), t.name, t.why),
        Change::Fixes(list) => {
            let cells: usize = list.iter().map(|r| r.edits.len()).sum();
            format!(
                "{} fixes to {}, {} cells changed",
                list.len(),
                body.tables().join(", "),
                cells
            )
        }
    }
}

pub fn log(a: LogArgs) -> Result<i32> {
    let store = super::open_store()?;
    let reader = store.read();
    let trusted: Vec<[u8; 32]> = reader.signers()?.into_iter().map(|s| s.key).collect();
    let tags = reader.tags()?;
    if let Some(t) = &a.table
        && reader.extract_at(t, u64::MAX)?.is_none()
    {
        return Err(emend::Error::UnknownTable(t.clone()).into());
    }
    let entries: Vec<_> = history::log(&reader)?
        .into_iter()
        .filter(|(_, b)| a.table.as_deref().is_none_or(|t| b.tables().contains(&t)))
        .collect();
    if a.json {
        let items: Vec<serde_json::Value> = entries
            .iter()
            .map(|(c, b)| {
                let mut v = serde_json::json!({
                    "seq": c.seq,
                    "id": c.id.to_hex(),
                    "parent": b.parent.map(|p| p.to_hex()),
                    "time": b.time,
                    "author": {"name": b.author.name, "email": b.author.email, "key": data_encoding::HEXLOWER.encode(&b.author.key), "fingerprint": fingerprint(&b.author.key), "trusted": trusted.contains(&b.author.key)},
                    "message": b.message,
                    "tables": b.tables(),
                    "versions": b.versions.iter().map(|tv| serde_json::json!({"table": tv.table, "hash": tv.hash.to_hex(), "rows": tv.n_rows})).collect::<Vec<_>>(),
                });
                let obj = v.as_object_mut().expect("object");
                match &b.change {
                    Change::Trust(t) => {
                        obj.insert("kind".into(), "trust".into());
                        obj.insert("trust".into(), serde_json::json!({"key": data_encoding::HEXLOWER.encode(&t.key), "fingerprint": fingerprint(&t.key), "name": t.name, "email": t.email, "why": t.why}));
                    }
                    Change::Tag(t) => {
                        obj.insert("kind".into(), "tag".into());
                        obj.insert("tag".into(), serde_json::json!({"name": t.name, "target_seq": t.target_seq, "target_id": t.target.to_hex()}));
                    }
                    Change::Ingest(r) => {
                        obj.insert("kind".into(), "ingest".into());
                        obj.insert("extract".into(), serde_json::json!({"table": r.table, "file": r.file_name, "blake3": r.extract.to_hex(), "bytes": r.n_bytes, "rows": r.n_rows, "columns": r.header, "key": r.key}));
                    }
                    Change::Fixes(list) => {
                        obj.insert("kind".into(), "fixes".into());
                        obj.insert("fixes".into(), list.iter().map(|r| {
                            let mut f = super::fixes::fix_json(&r.fix, None);
                            f.as_object_mut().expect("object").insert("cells_changed".into(), r.edits.len().into());
                            f
                        }).collect::<Vec<_>>().into());
                    }
                }
                v
            })
            .collect();
        out::json(&serde_json::json!({ "commits": items }))?;
        return Ok(0);
    }
    let mut o = out::stdout();
    if entries.is_empty() {
        writeln!(o, "no commits yet")?;
    }
    for (c, b) in &entries {
        let email = b
            .author
            .email
            .as_deref()
            .map(|e| format!(" <{e}>"))
            .unwrap_or_default();
        let trust = if trusted.contains(&b.author.key) {
            ""
        } else {
            " (untrusted key)"
        };
        writeln!(
            o,
            "{} {}  {}  {}{}  {}{}",
            paint(BOLD, format!("commit {}", c.seq)),
            paint(DIM, c.id.short()),
            b.time,
            b.author.name,
            email,
            paint(DIM, fingerprint(&b.author.key)),
            trust
        )?;
        let names: Vec<&str> = tags
            .iter()
            .filter(|(_, _, target)| *target == c.seq)
            .map(|(n, _, _)| n.as_str())
            .collect();
        if !names.is_empty() {
            writeln!(o, "    tagged {}", paint(BOLD, names.join(", ")))?;
        }
        writeln!(o, "    {}", b.message)?;
        writeln!(o, "    {}", paint(DIM, summary(b)))?;
        if let Change::Fixes(list) = &b.change {
            for r in list {
                writeln!(
                    o,
                    "      - {} — {} ({} cells)",
                    r.fix.action.describe(),
                    r.fix.why,
                    r.edits.len()
                )?;
            }
        }
    }
    Ok(0)
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
        let file =
            std::fs::File::create(&tmp).with_context(|| format!("creating {}", tmp.display()))?;
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

pub fn export(a: ExportArgs) -> Result<i32> {
    let store = super::open_store()?;
    let reader = store.read();
    let rev = history::resolve(&reader, &a.at)?;
    let v = history::version_at(&reader, &a.table, rev)?;
    let opts = ExportOptions {
        na: a.na.clone(),
        with_excluded: a.with_excluded,
        with_distrusted: a.with_distrusted,
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
    match &a.output {
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
            .and_then(|p| p.file_name())
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| format!("{}.csv", v.table));
        let view = emend::history::report::codebook_view(&reader, &v, &csv_url, a.with_distrusted)?;
        write_json_file(path, &emend::report::csvw_metadata(&view))?;
        writeln!(
            anstream::stderr(),
            "wrote CSVW metadata for {csv_url} to {}",
            path.display()
        )?;
    }
    if let Some(path) = &a.provenance {
        let view = emend::history::report::prov_view(&reader, &v.table, upto)?;
        write_json_file(path, &emend::report::prov_json(&view))?;
        writeln!(
            anstream::stderr(),
            "wrote PROV-JSON lineage ({} commits) to {}",
            view.commits.len(),
            path.display()
        )?;
    }
    if let Some(path) = &a.decisions {
        let rows = emend::history::report::decision_rows(&reader, &v.table, v.ingest_seq, upto)?;
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

pub fn report(a: ReportArgs) -> Result<i32> {
    let store = super::open_store()?;
    let reader = store.read();
    let rev = history::resolve(&reader, &a.at)?;
    history::version_at(&reader, &a.table, rev)?;
    let started = std::time::Instant::now();
    let verify = emend::history::verify::verify(
        &reader,
        &emend::history::verify::Trust::Store,
        &mut |_| {},
    )?;
    let view =
        emend::history::report::report_view(&reader, &a.table, rev, &verify, &super::now()?)?;
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
