//! `rules` (adopt a rules file, signed) and `check` (apply the rules in force to a version).

use super::context::CliContext;
use super::fixes::FixMeta;
use super::out::{self, BAD, BOLD, DIM, GOOD, paint};
use anyhow::Result;
use clap::Args;
use emend::checks::{CheckReport, Severity};
use emend::ledger::adopt;
use emend::query;
use emend::views;
use std::io::Write;
use std::path::PathBuf;

#[derive(Args, Debug)]
pub struct RulesArgs {
    /// Table
    table: String,
    /// The rules file (TOML; see docs/rules.md)
    file: PathBuf,
    #[command(flatten)]
    meta: FixMeta,
}

#[derive(Args, Debug)]
pub struct CheckArgs {
    /// Table
    table: String,
    /// Revision: commit number, tag, 8+ hex digits, 'latest' (default) or 'raw'
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// Try a rules file that is not adopted yet instead of the rules in force
    #[arg(long, value_name = "FILE")]
    rules: Option<PathBuf>,
    /// List every violation found (up to the number kept per rule), not the first five
    #[arg(long, conflicts_with = "json")]
    all: bool,
    /// Print JSON (docs/json.md)
    #[arg(long)]
    json: bool,
}

pub fn adopt(cx: &CliContext, a: RulesArgs) -> Result<i32> {
    let mut store = cx.store()?;
    let id = cx.identity()?;
    let ctx = id.context(cx.now()?);
    let done = adopt::adopt(
        &mut store,
        &a.table,
        &a.file,
        &a.meta.why,
        &a.meta.evidence,
        a.meta.consulted.clone(),
        &ctx,
        &cx.evidence_limits()?,
    )?;
    writeln!(
        out::stdout(),
        "{} {} for {} as commit {} {}; 'emend check {}' applies them",
        paint(GOOD, "adopted"),
        a.file.display(),
        paint(BOLD, &a.table),
        done.seq,
        paint(DIM, done.id.short()),
        a.table
    )?;
    Ok(0)
}

pub fn check(cx: &CliContext, a: CheckArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    let version = query::version_at(&reader, &a.table, rev)?;
    let (source, text) = match &a.rules {
        Some(p) => (
            format!("{} (not adopted)", p.display()),
            adopt::read_text(p, &cx.evidence_limits()?)?,
        ),
        None => {
            let upto = if rev.raw { version.seq } else { rev.seq };
            match query::rules_at(&reader, &a.table, upto)? {
                Some((seq, name, text)) => (format!("{name} (adopted in commit {seq})"), text),
                None => anyhow::bail!(
                    "no rules adopted for '{}' by commit {upto}; adopt a file with 'emend rules {} FILE --why ...', or try one with --rules FILE",
                    a.table,
                    a.table
                ),
            }
        }
    };
    let path = a.rules.clone().unwrap_or_else(|| PathBuf::from(&source));
    let ruleset = adopt::parse_for(&path, &text, version.header())?;
    let report = views::check_version(&reader, &version, &ruleset)?;
    let label = if rev.raw {
        "raw".to_string()
    } else {
        format!("commit {}", rev.seq)
    };
    if a.json {
        let mut v = serde_json::to_value(&report)?;
        let obj = v.as_object_mut().expect("object");
        obj.insert("table".into(), a.table.clone().into());
        obj.insert(
            "revision".into(),
            serde_json::json!({"seq": rev.seq, "raw": rev.raw}),
        );
        obj.insert("rules_source".into(), source.into());
        obj.insert("passed".into(), report.passed().into());
        out::json(&v)?;
    } else {
        print_report(&a.table, &label, &source, &report, a.all)?;
    }
    Ok(if report.passed() {
        super::EXIT_OK
    } else {
        super::EXIT_FOUND
    })
}

fn print_report(
    table: &str,
    label: &str,
    source: &str,
    report: &CheckReport,
    all: bool,
) -> Result<()> {
    let q = emend::model::quantity;
    let mut o = out::stdout();
    let errors = report.count(Severity::Error);
    let warnings = report.count(Severity::Warning);
    let verdict = if report.passed() {
        paint(GOOD, "passes")
    } else {
        paint(BAD, "FAILS")
    };
    writeln!(
        o,
        "{} at {label} {verdict} {source}: {}, {} at error level and {} at warning level",
        paint(BOLD, table),
        q(report.n_rows, "row", "rows"),
        q(errors, "violation", "violations"),
        q(warnings, "violation", "violations")
    )?;
    // Broken rules first, errors before warnings; the rules that hold in one line at the end.
    let mut broken: Vec<_> = report.rules.iter().filter(|r| r.violations > 0).collect();
    broken.sort_by_key(|r| (r.severity != Severity::Error, r.line));
    let shown = if all { emend::checks::MAX_EXAMPLES } else { 5 };
    for r in &broken {
        let (mark, sev) = match r.severity {
            Severity::Error => (paint(BAD, "breaks "), "error"),
            Severity::Warning => (paint(BOLD, "warns  "), "warning"),
        };
        writeln!(
            o,
            "  {mark} {} {} {}",
            paint(BOLD, &r.id),
            r.description,
            paint(
                DIM,
                format!(
                    "({sev}, line {}, {})",
                    r.line,
                    q(r.violations, "row", "rows")
                )
            )
        )?;
        for v in r.examples.iter().take(shown) {
            writeln!(
                o,
                "          row {} (#{}) {}{}: {}",
                out::clean(&v.row),
                v.pos,
                v.column.as_deref().unwrap_or(""),
                v.value
                    .as_deref()
                    .map(|x| format!(" = {}", out::quoted(&Some(x.to_owned()))))
                    .unwrap_or_default(),
                out::clean(&v.message)
            )?;
        }
        let listed = r.examples.len().min(shown) as u64;
        if r.violations > listed {
            let how = if all || listed as usize >= emend::checks::MAX_EXAMPLES {
                format!(
                    "a check keeps the first {} rows of each rule",
                    emend::checks::MAX_EXAMPLES
                )
            } else {
                "--all lists them".to_string()
            };
            writeln!(o, "          … {} more ({how})", r.violations - listed)?;
        }
    }
    for f in &report.flags {
        let what = match f.kind {
            emend::checks::FlagKind::MostlyMissing => "mostly missing",
            emend::checks::FlagKind::NearConstant => "nearly one value",
        };
        writeln!(
            o,
            "  {} column {} is {what}: {:.1}% of its cells, above the threshold of {:.1}%",
            paint(BOLD, "flag   "),
            f.column,
            f.share * 100.0,
            f.threshold * 100.0
        )?;
    }
    let holding: Vec<&str> = report
        .rules
        .iter()
        .filter(|r| r.violations == 0)
        .map(|r| r.id.as_str())
        .collect();
    if !holding.is_empty() {
        writeln!(
            o,
            "  {} {}: {}",
            paint(GOOD, "holds  "),
            q(holding.len() as u64, "rule", "rules"),
            paint(DIM, holding.join(", "))
        )?;
    }
    Ok(())
}
