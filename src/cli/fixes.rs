//! The fix commands: set, recode, missing, exclude, distrust. Each records one pending fix with
//! its reason; nothing changes in history until `emend commit`.

use super::context::CliContext;
use super::edits::{self, RowChoice};
use super::out::{BOLD, DIM, paint};
use anyhow::{Context, Result, bail};
use clap::Args;
use emend::model::edit::{Rows, Transform};
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
    /// A file that backs the decision (stored content-addressed); may be repeated. A regular
    /// file or a pipe of at most EMEND_MAX_EVIDENCE_MIB (default 256 MiB), read before the
    /// store is locked
    #[arg(long, value_name = "FILE")]
    pub evidence: Vec<PathBuf>,
    /// Who was consulted about it
    #[arg(long, value_name = "WHO")]
    pub consulted: Option<String>,
    /// A rule of the rules in force the new values break on purpose (for example ph.hard);
    /// the recorded reason names it
    #[arg(long, value_name = "RULE")]
    pub despite: Option<String>,
}

#[derive(Args, Debug)]
#[command(
    after_help = "Forms:\n  emend set TABLE ROW COLUMN VALUE --why ...          one cell\n  emend set TABLE ROW COLUMN --missing --why ...      one cell to missing\n  emend set TABLE COLUMN VALUE --rows K1,K2 --why ...  chosen rows\n  emend set TABLE COLUMN --negate --where 'lon above 0' --why ...\n  emend set TABLE COLUMN --scale -1 --rows '#412' --why ..."
)]
pub struct SetArgs {
    /// Table
    table: String,
    /// ROW COLUMN [VALUE] for one cell; COLUMN [VALUE] with --rows or --where. A row is its
    /// key (composite keys: values joined by commas) or #N for the row at position N
    #[arg(num_args = 1..=3, value_name = "ROW COLUMN VALUE", required = true)]
    args: Vec<String>,
    /// Set the cells to missing instead of a value
    #[arg(long, conflicts_with_all = ["negate", "scale", "round"])]
    missing: bool,
    /// Turn the sign of each number
    #[arg(long, conflicts_with_all = ["scale", "round"])]
    negate: bool,
    /// Multiply each number by ten to this power (-1 moves the decimal point one place left)
    #[arg(
        long,
        value_name = "POWER",
        allow_negative_numbers = true,
        conflicts_with = "round"
    )]
    scale: Option<i32>,
    /// Round each number to this many decimal places (half away from zero)
    #[arg(long, value_name = "PLACES")]
    round: Option<u32>,
    #[command(flatten)]
    choice: RowChoice,
    /// Record the fix even if it changes no cell now
    #[arg(long)]
    allow_empty: bool,
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
    /// Record the fix even if it changes no cell now
    #[arg(long)]
    allow_empty: bool,
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
    /// Record the fix even if it changes no cell now
    #[arg(long)]
    allow_empty: bool,
    #[command(flatten)]
    meta: FixMeta,
}

#[derive(Args, Debug)]
pub struct ExcludeArgs {
    /// Table
    table: String,
    /// One row: its key, or #N for the row at position N (or choose rows with --rows,
    /// --where or --duplicates)
    row: Option<String>,
    /// Leave out every row that repeats an earlier row (the first stays)
    #[arg(long, conflicts_with_all = ["row", "rows", "condition"])]
    duplicates: bool,
    /// With --duplicates: compare only these columns (comma-separated)
    #[arg(
        long,
        value_name = "COLUMNS",
        requires = "duplicates",
        value_delimiter = ','
    )]
    by: Vec<String>,
    #[command(flatten)]
    choice: RowChoice,
    /// Record the fix even if it chooses no row now
    #[arg(long)]
    allow_empty: bool,
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

fn row_id(cx: &CliContext, table: &str, text: &str) -> Result<emend::model::RowId> {
    let store = cx.store()?;
    Ok(query::parse_row(&store.read(), table, text)?)
}

pub fn set(cx: &CliContext, a: SetArgs) -> Result<i32> {
    let chosen = a.choice.given();
    let (row, column, value) = match (chosen, a.args.as_slice()) {
        (false, [row, column]) => (Some(row.clone()), column.clone(), None),
        (false, [row, column, value]) => (Some(row.clone()), column.clone(), Some(value.clone())),
        (false, [_]) => bail!(
            "name the row and the column: 'emend set TABLE ROW COLUMN VALUE', or choose rows with --rows or --where"
        ),
        (true, [column]) => (None, column.clone(), None),
        (true, [column, value]) => {
            if a.missing || a.negate || a.scale.is_some() || a.round.is_some() {
                bail!(
                    "with --rows or --where, name only the COLUMN ('{column} {value}' reads as a column and a value); the rows come from --rows or --where"
                );
            }
            (None, column.clone(), Some(value.clone()))
        }
        (true, _) => bail!(
            "with --rows or --where, give COLUMN [VALUE] only: 'emend set TABLE COLUMN VALUE --rows K1,K2'"
        ),
        (false, _) => bail!("'emend set TABLE ROW COLUMN VALUE'"),
    };
    let transform = match (value, a.missing, a.negate, a.scale, a.round) {
        (Some(v), false, false, None, None) => Transform::Value(Some(v)),
        (None, true, false, None, None) => Transform::Value(None),
        (None, false, true, None, None) => Transform::Negate,
        (None, false, false, Some(p), None) => Transform::Scale(p),
        (None, false, false, None, Some(n)) => Transform::Round(n),
        (None, false, false, None, None) => match &row {
            // `set TABLE COLUMN VALUE` without rows: the first word was read as a row.
            Some(r) => bail!(
                "'{r} {column}' reads as ROW COLUMN with no value: give 'emend set TABLE ROW COLUMN VALUE' for one cell, or 'emend set TABLE {r} {column} --rows ... | --where ... | --breaking ...' for chosen rows"
            ),
            None => bail!(
                "give the new VALUE, or one of --missing, --negate, --scale POWER, --round PLACES"
            ),
        },
        (Some(_), ..) => {
            bail!("give a VALUE or a transform (--missing, --negate, --scale, --round), not both")
        }
        _ => bail!("give one of --missing, --negate, --scale, --round"),
    };
    let action = match (row, transform) {
        // One cell set to a value or to missing keeps the single-cell form.
        (Some(r), Transform::Value(value)) if !r.starts_with('#') => FixAction::Set {
            row: row_id(cx, &a.table, &r)?,
            column,
            value,
        },
        (Some(r), transform) => {
            let store = cx.store()?;
            let rows = query::parse_rows(&store.read(), &a.table, &[r])?;
            FixAction::Edit {
                column,
                rows: Rows::Listed(rows),
                transform,
            }
        }
        (None, transform) => FixAction::Edit {
            column,
            rows: a.choice.resolve(cx, &a.table, false)?,
            transform,
        },
    };
    edits::record(cx, a.table, action, a.meta, a.allow_empty)
}

fn read_map(path: &std::path::Path) -> Result<Vec<(String, String)>> {
    let file = emend::ingest::open_input(path)?;
    let mut reader = emend::table::csv::CsvReader::new(file.reader(), b',');
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
    edits::record(
        cx,
        a.table,
        FixAction::Recode {
            column: a.column,
            pairs,
        },
        a.meta,
        a.allow_empty,
    )
}

pub fn missing(cx: &CliContext, a: MissingArgs) -> Result<i32> {
    edits::record(
        cx,
        a.table,
        FixAction::Missing {
            column: a.column,
            codes: a.codes,
        },
        a.meta,
        a.allow_empty,
    )
}

pub fn exclude(cx: &CliContext, a: ExcludeArgs) -> Result<i32> {
    let action = if a.duplicates {
        FixAction::ExcludeRows {
            rows: Rows::Duplicates(a.by),
            resolved: Vec::new(),
        }
    } else if let Some(r) = a.row {
        if a.choice.given() {
            bail!("name one ROW, or choose rows with --rows or --where, not both");
        }
        let store = cx.store()?;
        let mut rows = query::parse_rows(&store.read(), &a.table, &[r])?;
        FixAction::Exclude {
            row: rows.remove(0),
        }
    } else if a.choice.given() {
        FixAction::ExcludeRows {
            rows: a.choice.resolve(cx, &a.table, false)?,
            resolved: Vec::new(),
        }
    } else {
        bail!("choose what to leave out: a ROW, --rows, --where or --duplicates");
    };
    edits::record(cx, a.table, action, a.meta, a.allow_empty)
}

pub fn distrust(cx: &CliContext, a: DistrustArgs) -> Result<i32> {
    edits::record(
        cx,
        a.table,
        FixAction::Distrust { column: a.column },
        a.meta,
        false,
    )
}

/// Print one fix for people.
pub fn print_fix(o: &mut dyn Write, fix: &Fix, indent: &str) -> Result<()> {
    writeln!(
        o,
        "{} {}",
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
        FixAction::Edit {
            column,
            rows,
            transform,
        } => {
            obj.insert("column".into(), column.clone().into());
            obj.insert("rows".into(), rows.to_string().into());
            obj.insert("transform".into(), transform.to_string().into());
        }
        FixAction::Withdraw { seq, fix } => {
            obj.insert(
                "withdraws".into(),
                serde_json::json!({"seq": seq, "fix": fix}),
            );
        }
        FixAction::ExcludeRows { rows, resolved }
        | FixAction::Keep { rows, resolved, .. }
        | FixAction::Note { rows, resolved, .. } => {
            if let Some(c) = fix.action.column() {
                obj.insert("column".into(), c.into());
            }
            obj.insert("rows".into(), rows.to_string().into());
            obj.insert(
                "resolved_rows".into(),
                resolved
                    .iter()
                    .map(ToString::to_string)
                    .collect::<Vec<_>>()
                    .into(),
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
