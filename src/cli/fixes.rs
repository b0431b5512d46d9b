//! The fix commands: set, recode, missing, exclude, distrust. Each records one pending fix with
//! its reason; nothing changes in history until `emend commit`.

use super::context::CliContext;
use super::out::{self, BOLD, DIM, GOOD, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::ledger::{self, FixRequest};
use emend::model::{Fix, FixAction};
use emend::query;
use std::io::Write;
use std::path::PathBuf;

/// Shared options of every fix command.
#[derive(Args, Debug, Clone)]
pub struct FixMeta {
    /// Why this fix is right (required, recorded in the signed commit)
    #[arg(long, value_name = "REASON")]
    pub why: String,
    /// A file that backs the decision (stored content-addressed); may be repeated
    #[arg(long, value_name = "FILE")]
    pub evidence: Vec<PathBuf>,
    /// Who was consulted about it
    #[arg(long, value_name = "WHO")]
    pub consulted: Option<String>,
}

#[derive(Args, Debug)]
pub struct SetArgs {
    /// Table
    table: String,
    /// Row: its key value (composite keys: values joined by commas), or its 1-based position
    /// when the table has no key
    row: String,
    /// Column
    column: String,
    /// The new value (leave out with --missing)
    value: Option<String>,
    /// Set the cell to missing instead of a value
    #[arg(long, conflicts_with = "value")]
    missing: bool,
    #[command(flatten)]
    meta: FixMeta,
}

#[derive(Args, Debug)]
pub struct RecodeArgs {
    /// Table
    table: String,
    /// Column
    column: String,
    /// The value to replace (exact match)
    #[arg(long, requires = "to", conflicts_with = "map")]
    from: Option<String>,
    /// The value to put in its place
    #[arg(long, requires = "from")]
    to: Option<String>,
    /// A two-column CSV file of from,to pairs (a first line 'from,to' is skipped)
    #[arg(long, value_name = "FILE")]
    map: Option<PathBuf>,
    #[command(flatten)]
    meta: FixMeta,
}

#[derive(Args, Debug)]
pub struct MissingArgs {
    /// Table
    table: String,
    /// Column
    column: String,
    /// Values that mean "missing" in this column (e.g. --code -999 -99 N/A); a code that
    /// starts with '-' but is not a number is written --code=-
    #[arg(
        long = "code",
        value_name = "VALUE",
        required = true,
        num_args = 1..,
        action = clap::ArgAction::Append,
        allow_negative_numbers = true
    )]
    codes: Vec<String>,
    #[command(flatten)]
    meta: FixMeta,
}

#[derive(Args, Debug)]
pub struct ExcludeArgs {
    /// Table
    table: String,
    /// Row: its key value, or its 1-based position when the table has no key
    row: String,
    #[command(flatten)]
    meta: FixMeta,
}

#[derive(Args, Debug)]
pub struct DistrustArgs {
    /// Table
    table: String,
    /// Column
    column: String,
    #[command(flatten)]
    meta: FixMeta,
}

fn record(cx: &CliContext, table: String, action: FixAction, meta: FixMeta) -> Result<i32> {
    let mut store = cx.store()?;
    let now = cx.now()?;
    let req = FixRequest {
        table,
        action,
        why: meta.why,
        evidence: meta.evidence,
        consulted: meta.consulted,
    };
    let recorded = ledger::record_fix(&mut store, req, &now)?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} {} (pending; 'emend commit -m ...' signs it)",
        paint(GOOD, "recorded"),
        recorded.fix.action.describe()
    )?;
    if let Some(note) = recorded.note {
        writeln!(o, "  note: {note}")?;
    }
    Ok(0)
}

fn row_id(cx: &CliContext, table: &str, text: &str) -> Result<emend::model::RowId> {
    let store = cx.store()?;
    Ok(query::parse_row(&store.read(), table, text)?)
}

pub fn set(cx: &CliContext, a: SetArgs) -> Result<i32> {
    let value = match (a.value, a.missing) {
        (Some(v), false) => Some(v),
        (None, true) => None,
        _ => bail!("give the new VALUE, or --missing to set the cell to missing"),
    };
    let row = row_id(cx, &a.table, &a.row)?;
    record(
        cx,
        a.table,
        FixAction::Set {
            row,
            column: a.column,
            value,
        },
        a.meta,
    )
}

fn read_map(path: &std::path::Path) -> Result<Vec<(String, String)>> {
    let file = emend::ingest::open_input(path)?;
    let mut reader = emend::table::csv::CsvReader::new(file, b',');
    let mut rec = emend::table::csv::RawRecord::default();
    let mut pairs = Vec::new();
    loop {
        match reader.read_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(emend::table::csv::ReadError::Csv(e)) => {
                bail!("{}:{}:{}: {}", path.display(), e.line, e.column, e.problem)
            }
            Err(emend::table::csv::ReadError::Io(e)) => {
                return Err(e).with_context(|| format!("reading {}", path.display()));
            }
        }
        if rec.is_blank_line() {
            continue;
        }
        if rec.len() != 2 {
            bail!(
                "{}:{}: expected two fields (from,to), found {}",
                path.display(),
                rec.line,
                rec.len()
            );
        }
        let text = |i: usize| -> Result<String> {
            String::from_utf8(rec.get(i).unwrap_or_default().to_vec())
                .with_context(|| format!("{}:{}: not UTF-8", path.display(), rec.line))
        };
        let (from, to) = (text(0)?, text(1)?);
        if rec.line == 1 && from == "from" && to == "to" {
            continue;
        }
        if pairs.iter().any(|(f, _): &(String, String)| *f == from) {
            bail!("{}:{}: '{from}' is mapped twice", path.display(), rec.line);
        }
        pairs.push((from, to));
    }
    if pairs.is_empty() {
        bail!("{} holds no from,to pairs", path.display());
    }
    Ok(pairs)
}

pub fn recode(cx: &CliContext, a: RecodeArgs) -> Result<i32> {
    let pairs = match (a.from, a.to, &a.map) {
        (Some(f), Some(t), None) => vec![(f, t)],
        (None, None, Some(map)) => read_map(map)?,
        _ => bail!("give --from VALUE --to VALUE, or --map FILE"),
    };
    record(
        cx,
        a.table,
        FixAction::Recode {
            column: a.column,
            pairs,
        },
        a.meta,
    )
}

pub fn missing(cx: &CliContext, a: MissingArgs) -> Result<i32> {
    record(
        cx,
        a.table,
        FixAction::Missing {
            column: a.column,
            codes: a.codes,
        },
        a.meta,
    )
}

pub fn exclude(cx: &CliContext, a: ExcludeArgs) -> Result<i32> {
    let row = row_id(cx, &a.table, &a.row)?;
    record(cx, a.table, FixAction::Exclude { row }, a.meta)
}

pub fn distrust(cx: &CliContext, a: DistrustArgs) -> Result<i32> {
    record(
        cx,
        a.table,
        FixAction::Distrust { column: a.column },
        a.meta,
    )
}

/// Print one fix for people.
pub fn print_fix(o: &mut dyn Write, fix: &Fix, indent: &str) -> Result<()> {
    writeln!(
        o,
        "{indent}{} {}",
        paint(BOLD, format!("{}:", fix.table)),
        fix.action.describe()
    )?;
    writeln!(o, "{indent}  why: {}", fix.why)?;
    if !fix.origins.is_empty() {
        let chain: Vec<String> = fix
            .origins
            .iter()
            .map(|x| format!("commit {}", x.seq))
            .collect();
        writeln!(o, "{indent}  carried from {}", chain.join(" via "))?;
    }
    if let Some(c) = &fix.consulted {
        writeln!(o, "{indent}  consulted: {c}")?;
    }
    for e in &fix.evidence {
        writeln!(
            o,
            "{indent}  evidence: {} {}",
            e.name,
            paint(DIM, format!("({} bytes, {})", e.n_bytes, e.blob.short()))
        )?;
    }
    Ok(())
}

/// The JSON shape of a fix (docs/json.md).
pub fn fix_json(fix: &Fix, added_at: Option<&str>) -> serde_json::Value {
    let mut v = serde_json::json!({
        "table": fix.table,
        "kind": fix.action.kind(),
        "description": fix.action.describe(),
        "why": fix.why,
        "consulted": fix.consulted,
        "evidence": fix.evidence.iter().map(|e| serde_json::json!({
            "name": e.name, "blake3": e.blob.to_hex(), "bytes": e.n_bytes
        })).collect::<Vec<_>>(),
    });
    let obj = v.as_object_mut().expect("built as an object");
    match &fix.action {
        FixAction::Set { row, column, value } => {
            obj.insert("row".into(), row.to_string().into());
            obj.insert("column".into(), column.clone().into());
            obj.insert("value".into(), value.clone().into());
        }
        FixAction::Recode { column, pairs } => {
            obj.insert("column".into(), column.clone().into());
            obj.insert(
                "pairs".into(),
                pairs
                    .iter()
                    .map(|(f, t)| serde_json::json!({"from": f, "to": t}))
                    .collect::<Vec<_>>()
                    .into(),
            );
        }
        FixAction::Missing { column, codes } => {
            obj.insert("column".into(), column.clone().into());
            obj.insert("codes".into(), codes.clone().into());
        }
        FixAction::Exclude { row } => {
            obj.insert("row".into(), row.to_string().into());
        }
        FixAction::Distrust { column } => {
            obj.insert("column".into(), column.clone().into());
        }
        FixAction::Rules {
            file_name,
            blob,
            n_bytes,
        } => {
            obj.insert(
                "rules_file".into(),
                serde_json::json!({"name": file_name, "blake3": blob.to_hex(), "bytes": n_bytes}),
            );
        }
    }
    if !fix.origins.is_empty() {
        obj.insert(
            "carried_from".into(),
            fix.origins
                .iter()
                .map(|o| serde_json::json!({"seq": o.seq, "id": o.id.to_hex(), "fix_index": o.fix_idx}))
                .collect::<Vec<_>>()
                .into(),
        );
    }
    if let Some(t) = added_at {
        obj.insert("recorded_at".into(), t.into());
    }
    v
}
