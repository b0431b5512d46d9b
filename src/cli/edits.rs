//! The fix commands that choose rows and transform cells: `set` with `--rows` or `--where`,
//! `tidy`, `replace`, `dates`, `exclude` with a choice of rows, `keep` and `note`. Each
//! records one pending fix; the library tries it on the latest version first and says what it
//! will change.

use super::context::CliContext;
use super::fixes::FixMeta;
use super::out::{self, GOOD, paint};
use anyhow::{Result, bail};
use clap::{Args, ValueEnum};
use emend::checks::parse_condition;
use emend::ledger::{self, FixRequest};
use emend::model::FixAction;
use emend::model::edit::{DayOrder, LetterCase, Rows, Transform};
use emend::query;
use std::io::Write;

/// How a fix chooses its rows.
#[derive(Args, Debug, Clone, Default)]
pub struct RowChoice {
    /// These rows: keys, or #N for the row at position N, separated by commas (by
    /// semicolons for a table with a composite key); may be repeated
    #[arg(long, value_name = "ROWS", conflicts_with = "condition")]
    pub rows: Vec<String>,
    /// The rows where a condition holds, in the rules file's words: 'ph above 14',
    /// 'site one of "Fox Run","Heron Pool" and notes is missing'
    #[arg(long = "where", value_name = "CONDITION", conflicts_with = "breaking")]
    pub condition: Option<String>,
    /// The rows a rule of the adopted rules finds: 'ph.hard', or a condition's id
    #[arg(long, value_name = "RULE", conflicts_with = "rows")]
    pub breaking: Option<String>,
}

impl RowChoice {
    /// Whether any rows were chosen.
    pub fn given(&self) -> bool {
        !self.rows.is_empty() || self.condition.is_some() || self.breaking.is_some()
    }

    /// The stored choice; every row when none is given and `all` is allowed.
    pub fn resolve(&self, cx: &CliContext, table: &str, all: bool) -> Result<Rows> {
        if let Some(text) = &self.condition {
            let clauses =
                parse_condition(text).map_err(|e| anyhow::anyhow!("--where '{text}': {e}"))?;
            return Ok(Rows::Where(clauses));
        }
        if let Some(rule) = &self.breaking {
            let store = cx.store()?;
            let reader = store.read();
            let head = reader.head()?.map_or(0, |(seq, _)| seq);
            return Ok(query::breaking_rows(&reader, table, head, rule)?);
        }
        if self.rows.is_empty() {
            if all {
                return Ok(Rows::Where(Vec::new()));
            }
            bail!(
                "choose the rows: --rows KEY,KEY,…, --where 'COLUMN TEST VALUE' or --breaking RULE"
            );
        }
        let store = cx.store()?;
        let reader = store.read();
        let composite = {
            let probe = query::parse_row(&reader, table, "x,y")?;
            probe.as_str().contains(emend::model::KEY_SEPARATOR)
        };
        let sep = if composite { ';' } else { ',' };
        let texts: Vec<String> = self
            .rows
            .iter()
            .flat_map(|r| r.split(sep))
            .map(str::trim)
            .filter(|t| !t.is_empty())
            .map(str::to_owned)
            .collect();
        Ok(Rows::Listed(query::parse_rows(&reader, table, &texts)?))
    }
}

/// Record `action` and say what it will change.
pub fn record(
    cx: &CliContext,
    table: String,
    action: FixAction,
    meta: FixMeta,
    allow_empty: bool,
) -> Result<i32> {
    let mut store = cx.store()?;
    let now = cx.now()?;
    let req = FixRequest {
        table,
        action,
        why: meta.why,
        evidence: meta.evidence,
        consulted: meta.consulted,
        allow_empty,
        despite: meta.despite,
        by: cx.recorder()?,
    };
    let recorded = ledger::record_fix(&mut store, req, &now, &cx.evidence_limits()?)?;
    let mut o = out::stdout();
    writeln!(
        o,
        "{} {} (pending; 'emend commit -m ...' signs it)",
        paint(GOOD, "recorded"),
        recorded.fix.action.describe()
    )?;
    if let Some(p) = &recorded.preview {
        let chooses = matches!(
            recorded.fix.action,
            FixAction::ExcludeRows { .. } | FixAction::Keep { .. } | FixAction::Note { .. }
        );
        let plural = emend::model::quantity;
        if chooses {
            writeln!(
                o,
                "  chooses {} in the latest version",
                plural(p.rows, "row", "rows")
            )?;
        } else if matches!(recorded.fix.action, FixAction::Withdraw { .. }) && p.cells == 0 {
            // Withdrawing a fix that changed no value: the line below says what comes back.
        } else if !matches!(recorded.fix.action, FixAction::Edit { .. }) {
            writeln!(
                o,
                "  changes {} of the latest version",
                plural(p.cells, "cell", "cells")
            )?;
        } else {
            writeln!(
                o,
                "  changes {} in {} of the latest version",
                plural(p.cells, "cell", "cells"),
                plural(p.rows, "chosen row", "chosen rows")
            )?;
        }
        let show = |v: &Option<String>| match v {
            Some(v) => format!("'{v}'"),
            None => "missing".to_owned(),
        };
        for (row, old, new) in &p.samples {
            writeln!(o, "    {row}: {} → {}", show(old), show(new))?;
        }
    }
    if let Some(note) = recorded.note {
        writeln!(o, "  note: {note}")?;
    }
    Ok(0)
}

/// Letter cases for `tidy --case`.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum CaseArg {
    /// all lower case
    Lower,
    /// ALL UPPER CASE
    Upper,
    /// Each Word Capitalised
    Title,
}

#[derive(Args, Debug)]
#[command(group(clap::ArgGroup::new("how").required(true).args(["spaces", "final_stop", "case"])))]
pub struct TidyArgs {
    /// Table
    table: String,
    /// Column
    column: String,
    /// Drop leading and trailing spaces and make runs of spaces inside one space
    #[arg(long)]
    spaces: bool,
    /// Drop a lone full stop at the end
    #[arg(long)]
    final_stop: bool,
    /// Write the letters in one case
    #[arg(long, value_enum, value_name = "CASE")]
    case: Option<CaseArg>,
    #[command(flatten)]
    choice: RowChoice,
    /// Record the fix even if it changes no cell now
    #[arg(long)]
    allow_empty: bool,
    #[command(flatten)]
    meta: FixMeta,
}

pub fn tidy(cx: &CliContext, a: TidyArgs) -> Result<i32> {
    let transform = match (a.spaces, a.final_stop, a.case) {
        (true, _, _) => Transform::Spaces,
        (_, true, _) => Transform::FinalStop,
        (_, _, Some(c)) => Transform::Case(match c {
            CaseArg::Lower => LetterCase::Lower,
            CaseArg::Upper => LetterCase::Upper,
            CaseArg::Title => LetterCase::Title,
        }),
        _ => bail!("say how to tidy: --spaces, --final-stop or --case lower|upper|title"),
    };
    let rows = a.choice.resolve(cx, &a.table, true)?;
    let action = FixAction::Edit {
        column: a.column,
        rows,
        transform,
    };
    record(cx, a.table, action, a.meta, a.allow_empty)
}

#[derive(Args, Debug)]
pub struct ReplaceArgs {
    /// Table
    table: String,
    /// Column
    column: String,
    /// What to find: a regular expression (the `regex` crate's syntax)
    #[arg(long, value_name = "PATTERN")]
    pattern: String,
    /// What to put in its place ($1 names the first group; empty to delete)
    #[arg(long, value_name = "TEXT", allow_hyphen_values = true)]
    with: String,
    #[command(flatten)]
    choice: RowChoice,
    /// Record the fix even if it changes no cell now
    #[arg(long)]
    allow_empty: bool,
    #[command(flatten)]
    meta: FixMeta,
}

pub fn replace(cx: &CliContext, a: ReplaceArgs) -> Result<i32> {
    if let Err(e) = regex::Regex::new(&a.pattern) {
        bail!("--pattern '{}' does not compile: {e}", a.pattern);
    }
    let rows = a.choice.resolve(cx, &a.table, true)?;
    let action = FixAction::Edit {
        column: a.column,
        rows,
        transform: Transform::Replace {
            pattern: a.pattern,
            with: a.with,
        },
    };
    record(cx, a.table, action, a.meta, a.allow_empty)
}

/// Date orders for `dates --from`.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum OrderArg {
    /// 13/01/2026
    DayMonthYear,
    /// 01/13/2026
    MonthDayYear,
}

#[derive(Args, Debug)]
pub struct DatesArgs {
    /// Table
    table: String,
    /// Column
    column: String,
    /// The order the dates are written in; each becomes yyyy-mm-dd (ISO 8601)
    #[arg(long, value_enum, value_name = "ORDER")]
    from: OrderArg,
    #[command(flatten)]
    choice: RowChoice,
    /// Record the fix even if it changes no cell now
    #[arg(long)]
    allow_empty: bool,
    #[command(flatten)]
    meta: FixMeta,
}

pub fn dates(cx: &CliContext, a: DatesArgs) -> Result<i32> {
    let rows = a.choice.resolve(cx, &a.table, true)?;
    let order = match a.from {
        OrderArg::DayMonthYear => DayOrder::DayMonthYear,
        OrderArg::MonthDayYear => DayOrder::MonthDayYear,
    };
    let action = FixAction::Edit {
        column: a.column,
        rows,
        transform: Transform::Dates(order),
    };
    record(cx, a.table, action, a.meta, a.allow_empty)
}

#[derive(Args, Debug)]
pub struct KeepArgs {
    /// Table
    table: String,
    /// [ROW] COLUMN: the column whose values are right as they are, in one row (its key or
    /// #N) or in the rows --rows, --where or --breaking choose
    #[arg(num_args = 1..=2, value_name = "ROW COLUMN", required = true)]
    args: Vec<String>,
    #[command(flatten)]
    choice: RowChoice,
    #[command(flatten)]
    meta: FixMeta,
}

/// `[ROW] COLUMN` given as words: one row named before the column, or the column alone.
fn row_then_column(
    cx: &CliContext,
    table: &str,
    args: Vec<String>,
    choice: &RowChoice,
    all: bool,
) -> Result<(Option<String>, Rows)> {
    let mut args = args.into_iter();
    match (args.next(), args.next()) {
        (Some(row), Some(column)) => {
            if choice.given() {
                bail!(
                    "name the row before the column, or choose rows with --rows, --where or --breaking, not both"
                );
            }
            let one = RowChoice {
                rows: vec![row],
                ..RowChoice::default()
            };
            Ok((Some(column), one.resolve(cx, table, false)?))
        }
        (column, _) => Ok((column, choice.resolve(cx, table, all)?)),
    }
}

pub fn keep(cx: &CliContext, a: KeepArgs) -> Result<i32> {
    let (column, rows) = row_then_column(cx, &a.table, a.args, &a.choice, false)?;
    let action = FixAction::Keep {
        column: column.expect("clap requires the column"),
        rows,
        resolved: Vec::new(),
    };
    record(cx, a.table, action, a.meta, false)
}

#[derive(Args, Debug)]
pub struct NoteArgs {
    /// Table
    table: String,
    /// [ROW] [COLUMN]: the column the note is about (leave out for whole rows), in one row
    /// (its key or #N) or in the rows --rows, --where or --breaking choose
    #[arg(num_args = 0..=2, value_name = "ROW COLUMN")]
    args: Vec<String>,
    #[command(flatten)]
    choice: RowChoice,
    #[command(flatten)]
    meta: FixMeta,
}

pub fn note(cx: &CliContext, a: NoteArgs) -> Result<i32> {
    let whole_column = a.args.len() == 1;
    let (column, rows) = row_then_column(cx, &a.table, a.args, &a.choice, whole_column)?;
    let action = FixAction::Note {
        column,
        rows,
        resolved: Vec::new(),
    };
    record(cx, a.table, action, a.meta, false)
}

#[derive(Args, Debug)]
pub struct WithdrawArgs {
    /// The fix to withdraw, as 'emend log' numbers it: COMMIT.FIX (for example 7.2)
    fix: String,
    #[command(flatten)]
    meta: FixMeta,
}

/// Records the withdrawal of one committed fix (signed at the next commit; history keeps
/// both).
pub fn withdraw(cx: &CliContext, a: WithdrawArgs) -> Result<i32> {
    let Some((seq, fix)) = a
        .fix
        .split_once('.')
        .and_then(|(s, f)| Some((s.parse::<u64>().ok()?, f.parse::<u64>().ok()?)))
    else {
        bail!(
            "'{}' does not name a fix: write COMMIT.FIX as 'emend log' numbers them, for example 7.2",
            a.fix
        );
    };
    let (table, original) = {
        let store = cx.store()?;
        let reader = store.read();
        let r = ledger::committed_fix(&reader, seq, fix)?;
        (r.fix.table, r.fix.action.describe())
    };
    let code = record(cx, table, FixAction::Withdraw { seq, fix }, a.meta, false)?;
    writeln!(out::stdout(), "  withdraws: {original}")?;
    Ok(code)
}

#[derive(clap::Subcommand, Debug)]
pub enum DecisionsCommand {
    /// Record a reviewer's decisions from a CSV file, all or none: columns row, column,
    /// action (set, missing, keep, note, exclude; set when left out), value, why
    Apply(ApplyArgs),
}

#[derive(Args, Debug)]
pub struct ApplyArgs {
    /// Table
    table: String,
    /// The CSV file or workbook (.xlsx, .ods: the first sheet whose header names row and
    /// column): a header naming row, column and value (action and why optional)
    file: std::path::PathBuf,
    /// Record it even where a decision changes no cell now
    #[arg(long)]
    allow_empty: bool,
    #[command(flatten)]
    meta: FixMeta,
}

/// One field of a decisions file, by header name.
fn field<'a>(header: &[String], rec: &'a [String], name: &str) -> Option<&'a str> {
    header
        .iter()
        .position(|h| h == name)
        .and_then(|i| rec.get(i))
        .map(String::as_str)
}

pub fn decisions(cx: &CliContext, cmd: DecisionsCommand) -> Result<i32> {
    let DecisionsCommand::Apply(a) = cmd;
    let path = &a.file;
    let file = emend::ingest::open_input(path)?;
    let mut reader = emend::table::csv::CsvReader::new(file.reader(), b',');
    let mut rec = emend::table::csv::RawRecord::default();
    let mut header: Vec<String> = Vec::new();
    let mut lines: Vec<(u64, Vec<String>)> = Vec::new();
    // A workbook (issue 18): the first sheet whose header names row and column.
    let mut head = [0u8; 256];
    let n_head = std::io::Read::read(&mut file.reader(), &mut head)?;
    file.rewind()?;
    let workbook = emend::table::workbook::sniff(&head[..n_head]).is_some();
    if workbook {
        let sheet = emend::ingest::sheet_rows(&file, &["row", "column"])?;
        header = sheet.header;
        lines = sheet.rows;
    }
    // A workbook's rows came from its sheet above; a CSV file is read record by record.
    loop {
        if workbook {
            break;
        }
        match reader.read_record(&mut rec) {
            Ok(true) => {}
            Ok(false) => break,
            Err(emend::table::csv::ReadError::Csv(e)) => {
                bail!("{}:{}:{}: {}", path.display(), e.line, e.column, e.problem)
            }
            Err(emend::table::csv::ReadError::Io(e)) => {
                return Err(anyhow::Error::from(e).context(format!("reading {}", path.display())));
            }
        }
        if rec.is_blank_line() {
            continue;
        }
        let fields: Vec<String> = (0..rec.len())
            .map(|i| {
                String::from_utf8(rec.get(i).unwrap_or_default().to_vec()).map_err(|_| {
                    anyhow::anyhow!(
                        "{}:{}: field {} is not UTF-8",
                        path.display(),
                        rec.line,
                        i + 1
                    )
                })
            })
            .collect::<Result<_>>()?;
        if header.is_empty() {
            for need in ["row", "column"] {
                if !fields.iter().any(|f| f == need) {
                    bail!(
                        "{}:1: the header needs a '{need}' column (row, column, action, value, why)",
                        path.display()
                    );
                }
            }
            header = fields;
            continue;
        }
        if fields.len() != header.len() {
            bail!(
                "{}:{}: {} fields where the header has {}",
                path.display(),
                rec.line,
                fields.len(),
                header.len()
            );
        }
        lines.push((rec.line, fields));
    }
    if lines.is_empty() {
        bail!("{} holds no decisions", path.display());
    }
    let by = cx.recorder()?;
    let mut reqs = Vec::with_capacity(lines.len());
    {
        let store = cx.store()?;
        let reader = store.read();
        for (line, rec) in &lines {
            let at = |e: anyhow::Error| anyhow::anyhow!("{}:{line}: {e}", path.display());
            let row_text = field(&header, rec, "row").unwrap_or_default();
            let column = field(&header, rec, "column").unwrap_or_default().to_owned();
            let action = field(&header, rec, "action").unwrap_or("set").trim();
            let value = field(&header, rec, "value").unwrap_or_default().to_owned();
            let own = field(&header, rec, "why").unwrap_or_default().trim();
            let row = query::parse_rows(&reader, &a.table, &[row_text.to_owned()])
                .map_err(|e| at(e.into()))?
                .remove(0);
            let needs_column = |c: &str| {
                if c.is_empty() {
                    Err(at(anyhow::anyhow!("'{action}' needs a column")))
                } else {
                    Ok(())
                }
            };
            let act = match action {
                "set" | "" => {
                    needs_column(&column)?;
                    FixAction::Set {
                        row,
                        column,
                        value: Some(value),
                    }
                }
                "missing" => {
                    needs_column(&column)?;
                    FixAction::Set {
                        row,
                        column,
                        value: None,
                    }
                }
                "keep" => {
                    needs_column(&column)?;
                    FixAction::Keep {
                        column,
                        rows: Rows::Listed(vec![row]),
                        resolved: Vec::new(),
                    }
                }
                "note" => FixAction::Note {
                    column: (!column.is_empty()).then_some(column),
                    rows: Rows::Listed(vec![row]),
                    resolved: Vec::new(),
                },
                "exclude" => FixAction::Exclude { row },
                other => {
                    return Err(at(anyhow::anyhow!(
                        "unknown action '{other}': set, missing, keep, note or exclude"
                    )));
                }
            };
            let why = match own {
                "" => a.meta.why.clone(),
                own => format!("{}: {own}", a.meta.why.trim()),
            };
            reqs.push((
                *line,
                FixRequest {
                    table: a.table.clone(),
                    action: act,
                    why,
                    evidence: a.meta.evidence.clone(),
                    consulted: a.meta.consulted.clone(),
                    allow_empty: a.allow_empty,
                    despite: a.meta.despite.clone(),
                    by: by.clone(),
                },
            ));
        }
    }
    let mut store = cx.store()?;
    let now = cx.now()?;
    let line_of: Vec<u64> = reqs.iter().map(|(l, _)| *l).collect();
    let limits = cx.evidence_limits()?;
    let done = ledger::record_fixes(
        &mut store,
        reqs.into_iter().map(|(_, r)| r).collect(),
        &now,
        &limits,
    )
    .map_err(|(i, e)| {
        let line = i
            .checked_sub(1)
            .and_then(|i| line_of.get(i))
            .copied()
            .unwrap_or(0);
        anyhow::Error::from(e).context(format!(
            "{}:{line}: refused, so no decision of the file was recorded",
            path.display()
        ))
    })?;
    writeln!(
        out::stdout(),
        "{} {} decisions from {} (pending; 'emend status' lists them, 'emend commit -m ...' signs them)",
        paint(GOOD, "recorded"),
        done.len(),
        path.display()
    )?;
    Ok(0)
}
