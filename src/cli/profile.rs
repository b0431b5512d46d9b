//! `profile`: what needs cleaning in a table version, worst first, each finding with a ready
//! command line to edit and run. Nothing is changed.

use super::context::CliContext;
use super::out::{self, BAD, BOLD, DIM, paint, shell_quote};
use anyhow::Result;
use clap::Args;
use emend::profile::column::ValueRows;
use emend::profile::{
    ColumnProfile, Finding, FixSuggestion, Flag, ProfileOptions, Severity, TableOptions,
    text_boxplot, text_histogram,
};
use emend::query;
use emend::views::profiling::{MAX_NAMED_ROWS, profile_version};
use std::io::Write;

#[derive(Args, Debug)]
pub struct ProfileArgs {
    /// Table
    table: String,
    /// Revision: commit number, tag, 8+ hex digits of an id, 'latest' (default) or 'raw'
    #[arg(long, default_value = "latest", value_name = "REV")]
    at: String,
    /// One column in depth
    #[arg(long, value_name = "COLUMN")]
    col: Option<String>,
    /// How many of the most frequent levels to list
    #[arg(long, default_value_t = 10, value_name = "N")]
    top: usize,
    /// Flag a column as mostly missing above this share of missing cells (0 to 1)
    #[arg(long, default_value_t = 0.5, value_name = "SHARE")]
    mostly_missing: f64,
    /// Print JSON with every figure (docs/json.md)
    #[arg(long)]
    json: bool,
}

fn fmt_num(x: f64) -> String {
    if x == x.trunc() && x.abs() < 1e15 {
        format!("{x:.0}")
    } else {
        let s = format!("{x:.4}");
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

/// Command lines for a suggested fix, with a reason for the user to replace.
fn commands(table: &str, s: &FixSuggestion) -> Vec<String> {
    let t = shell_quote(table);
    let recode = |column: &str, from: &str, to: &str| {
        format!(
            "emend recode {t} {} --from {} --to {} --why \"...\"",
            shell_quote(column),
            shell_quote(from),
            shell_quote(to)
        )
    };
    match s {
        FixSuggestion::Recode { column, from, to } => {
            from.iter().map(|f| recode(column, f, to)).collect()
        }
        FixSuggestion::Missing { column, codes } => vec![format!(
            "emend missing {t} {} {} --why \"...\"",
            shell_quote(column),
            codes
                .iter()
                .map(|c| format!("--code {}", shell_quote(c)))
                .collect::<Vec<_>>()
                .join(" ")
        )],
        FixSuggestion::RecodeEach { column, pairs } => {
            pairs.iter().map(|(f, to)| recode(column, f, to)).collect()
        }
        FixSuggestion::Distrust { column } => {
            vec![format!(
                "emend distrust {t} {} --why \"...\"",
                shell_quote(column)
            )]
        }
    }
}

fn severity(s: Severity) -> String {
    match s {
        Severity::High => paint(BAD, "high  "),
        Severity::Medium => paint(BOLD, "medium"),
        Severity::Low => "low   ".to_string(),
    }
}

fn print_finding(o: &mut dyn Write, table: &str, f: &Finding, width: usize) -> Result<()> {
    writeln!(
        o,
        "  {} {:width$}  {}",
        severity(f.severity),
        f.column,
        f.message
    )?;
    if !f.rows.is_empty() {
        const SHOWN: usize = 6;
        let names: Vec<String> = f.rows.iter().take(SHOWN).map(ToString::to_string).collect();
        let more = if f.rows.len() > SHOWN {
            format!(
                " and {} more (--json lists up to {MAX_NAMED_ROWS})",
                f.rows.len() - SHOWN
            )
        } else {
            String::new()
        };
        writeln!(
            o,
            "  {:6} {:width$}  {}",
            "",
            "",
            paint(DIM, format!("rows {}{more}", names.join(", ")))
        )?;
    }
    if let Some(d) = &f.decided {
        writeln!(
            o,
            "  {:6} {:width$}  {}",
            "",
            "",
            paint(DIM, format!("decided in commit {}: {}", d.seq, d.how))
        )?;
        return Ok(());
    }
    if let Some(s) = &f.suggestion {
        let cmds = commands(table, s);
        for c in cmds.iter().take(3) {
            writeln!(
                o,
                "  {:6} {:width$}  {}",
                "",
                "",
                paint(DIM, format!("try: {c}"))
            )?;
        }
        if cmds.len() > 3 {
            writeln!(
                o,
                "  {:6} {:width$}  {}",
                "",
                "",
                paint(
                    DIM,
                    format!(
                        "… and {} more like it (or one recode --map FILE)",
                        cmds.len() - 3
                    )
                )
            )?;
        }
    }
    Ok(())
}

fn figures(c: &ColumnProfile) -> String {
    if let Some(n) = &c.numeric {
        let q = &n.quartiles;
        format!(
            "mean {} sd {} | min {} q1 {} median {} q3 {} max {}",
            fmt_num(n.mean),
            n.std_dev.map(fmt_num).unwrap_or_else(|| "-".into()),
            fmt_num(q.min),
            fmt_num(q.q1),
            fmt_num(q.median),
            fmt_num(q.q3),
            fmt_num(q.max)
        )
    } else {
        c.top_levels
            .iter()
            .take(4)
            .map(|l| format!("{} {}", l.value, l.count))
            .collect::<Vec<_>>()
            .join(", ")
    }
}

pub fn run(cx: &CliContext, a: ProfileArgs) -> Result<i32> {
    let store = cx.store_read()?;
    let reader = store.read();
    let rev = query::resolve(&reader, &a.at)?;
    let version = query::version_at(&reader, &a.table, rev)?;
    if let Some(c) = &a.col {
        version.col_idx(c)?;
    }
    if !(0.0..=1.0).contains(&a.mostly_missing) {
        anyhow::bail!(
            "--mostly-missing takes a share from 0 to 1 (got {})",
            a.mostly_missing
        );
    }
    let options = TableOptions {
        column: ProfileOptions {
            top_n: a.top,
            mostly_missing_share: a.mostly_missing,
            ..ProfileOptions::default()
        },
        ..TableOptions::default()
    };
    let profile = profile_version(&reader, &version, options)?;
    let label = if rev.raw {
        "raw".to_string()
    } else {
        format!("commit {}", rev.seq)
    };
    if a.json {
        let mut v = serde_json::json!({
            "table": version.table,
            "revision": {"seq": rev.seq, "raw": rev.raw},
            "excluded_rows_left_out": version.n_excluded(),
        });
        let p = serde_json::to_value(&profile)?;
        let obj = v.as_object_mut().expect("object");
        if let Some(c) = &a.col {
            let col = p["columns"]
                .as_array()
                .and_then(|cols| cols.iter().find(|x| x["name"] == *c))
                .cloned();
            obj.insert("column".into(), col.unwrap_or_default());
        } else {
            obj.insert("profile".into(), p);
        }
        out::json(&v)?;
        return Ok(0);
    }
    let mut o = out::stdout();
    writeln!(
        o,
        "{} at {} — {} rows × {} columns profiled{}",
        paint(BOLD, &version.table),
        label,
        profile.n_rows,
        profile.columns.len(),
        if version.n_excluded() > 0 && !rev.raw {
            format!(" ({} excluded rows left out)", version.n_excluded())
        } else {
            String::new()
        }
    )?;
    if let Some(name) = &a.col {
        let c = profile
            .columns
            .iter()
            .find(|c| &c.name == name)
            .expect("column checked above");
        let values = if c.numeric.is_some() {
            let idx = version.col_idx(name)?;
            let mut values = Vec::new();
            version.for_each_row(&reader, |row| {
                if !row.excluded
                    && let Some(v) = row.cells[idx]
                        .as_deref()
                        .and_then(emend::values::number_value)
                {
                    values.push(v);
                }
                Ok(std::ops::ControlFlow::Continue(()))
            })?;
            values
        } else {
            Vec::new()
        };
        return column_in_depth(&mut o, &version.table, c, &profile.findings, &values);
    }
    let width = profile
        .columns
        .iter()
        .map(|c| c.name.chars().count())
        .max()
        .unwrap_or(6)
        .min(24);
    writeln!(o)?;
    let (open, decided): (Vec<&Finding>, Vec<&Finding>) =
        profile.findings.iter().partition(|f| f.decided.is_none());
    if open.is_empty() {
        writeln!(o, "no open findings")?;
    } else {
        writeln!(
            o,
            "{} ({}), worst first",
            paint(BOLD, "findings"),
            open.len()
        )?;
        for f in open {
            print_finding(&mut o, &version.table, f, width)?;
        }
    }
    if !decided.is_empty() {
        writeln!(o)?;
        writeln!(o, "{} ({})", paint(BOLD, "decided"), decided.len())?;
        for f in decided {
            print_finding(&mut o, &version.table, f, width)?;
        }
    }
    writeln!(o)?;
    writeln!(o, "{}", paint(BOLD, "columns"))?;
    let header: Vec<String> = [
        "column",
        "type",
        "present",
        "blank",
        "declared missing",
        "distinct",
        "figures",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let rows: Vec<Vec<(String, Option<anstyle::Style>)>> = profile
        .columns
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let mut name = c.name.clone();
            if version.is_distrusted(i) {
                name.push_str(" (distrusted)");
            }
            vec![
                (name, Some(BOLD)),
                (format!("{:?}", c.inferred).to_lowercase(), None),
                (c.counts.present.to_string(), None),
                (c.counts.blank.to_string(), None),
                (c.counts.declared_missing.to_string(), None),
                (
                    format!(
                        "{}{}",
                        if c.counts.distinct_capped { "≥" } else { "" },
                        c.counts.distinct
                    ),
                    None,
                ),
                (figures(c), None),
            ]
        })
        .collect();
    write!(o, "{}", out::table(&header, &rows, 72))?;
    let numeric: Vec<&ColumnProfile> = profile
        .columns
        .iter()
        .filter(|c| c.numeric.is_some())
        .collect();
    if !numeric.is_empty() {
        writeln!(o)?;
        writeln!(
            o,
            "{} (+ the smallest and largest value, [ ] the quartiles, | the median, = the middle half; drawn from smallest to largest, so one far value squeezes the box)",
            paint(BOLD, "box plots")
        )?;
        for c in numeric {
            let n = c.numeric.as_ref().expect("filtered");
            writeln!(o, "  {:width$}  {}", c.name, text_boxplot(&n.quartiles, 48))?;
        }
    }
    writeln!(o)?;
    writeln!(
        o,
        "{}",
        paint(
            DIM,
            format!(
                "one column in depth: emend profile {} --col COLUMN",
                shell_quote(&version.table)
            )
        )
    )?;
    Ok(0)
}

fn column_in_depth(
    o: &mut dyn Write,
    table: &str,
    c: &ColumnProfile,
    all: &[Finding],
    values: &[f64],
) -> Result<i32> {
    writeln!(o)?;
    writeln!(
        o,
        "{} — {}",
        paint(BOLD, &c.name),
        format!("{:?}", c.inferred).to_lowercase()
    )?;
    let k = &c.counts;
    writeln!(
        o,
        "  cells {}  present {}  blank {}  declared missing {}  distinct {}{}",
        k.cells,
        k.present,
        k.blank,
        k.declared_missing,
        if k.distinct_capped { "≥" } else { "" },
        k.distinct
    )?;
    if let Some(n) = &c.numeric {
        let q = &n.quartiles;
        writeln!(
            o,
            "  mean {}  sd {}  (n = {})",
            fmt_num(n.mean),
            n.std_dev.map(fmt_num).unwrap_or_else(|| "-".into()),
            n.n
        )?;
        writeln!(
            o,
            "  min {}  q1 {}  median {}  q3 {}  max {}  iqr {}",
            fmt_num(q.min),
            fmt_num(q.q1),
            fmt_num(q.median),
            fmt_num(q.q3),
            fmt_num(q.max),
            fmt_num(n.iqr)
        )?;
        let f = &n.fences;
        writeln!(
            o,
            "  fences: inner {} to {}, outer {} to {}; {} cells beyond inner, {} beyond outer",
            fmt_num(f.lower_inner),
            fmt_num(f.upper_inner),
            fmt_num(f.lower_outer),
            fmt_num(f.upper_outer),
            n.beyond_inner,
            n.beyond_outer
        )?;
        if !n.outside.is_empty() {
            let list: Vec<String> = n
                .outside
                .iter()
                .take(10)
                .map(|v| format!("{} ×{}", fmt_num(v.value), v.count))
                .collect();
            writeln!(o, "  beyond the fences: {}", list.join(", "))?;
        }
        let with_rows: Vec<&ValueRows> = c
            .outside_rows
            .iter()
            .filter(|v| !v.rows.is_empty())
            .collect();
        if !with_rows.is_empty() {
            writeln!(o, "  rows beyond the fences (the first of each value):")?;
            for v in with_rows.iter().take(20) {
                let rows: Vec<String> = v.rows.iter().map(ToString::to_string).collect();
                writeln!(
                    o,
                    "    {:>12} ×{:<5} {}",
                    fmt_num(v.value),
                    v.count,
                    rows.join(", ")
                )?;
            }
            if with_rows.len() > 20 {
                writeln!(
                    o,
                    "    … and {} more values (--json lists them all)",
                    with_rows.len() - 20
                )?;
            }
        }
        if n.modified_z_defined {
            if !n.modified_z_flagged.is_empty() {
                let list: Vec<String> = n
                    .modified_z_flagged
                    .iter()
                    .take(10)
                    .map(|z| format!("{} (M = {:.1})", fmt_num(z.value), z.z))
                    .collect();
                writeln!(o, "  modified z-score |M| > 3.5: {}", list.join(", "))?;
            }
        } else {
            writeln!(o, "  modified z-scores undefined (MAD = 0)")?;
        }
        writeln!(o, "  {}", text_boxplot(&n.quartiles, 60))?;
    }
    if !c.top_levels.is_empty() {
        writeln!(o, "  most frequent:")?;
        for l in &c.top_levels {
            writeln!(o, "    {:>8}  {:>5.1}%  {}", l.count, l.percent, l.value)?;
        }
    }
    if !c.write_ins.is_empty() {
        writeln!(o, "  cells that break the type ({}):", c.write_in_cells)?;
        for w in c.write_ins.iter().take(10) {
            let rows: Vec<String> = w.rows.iter().map(u64::to_string).collect();
            writeln!(
                o,
                "    {:>8}  {}  {}",
                w.count,
                w.value,
                paint(DIM, format!("rows {}", rows.join(", ")))
            )?;
        }
    }
    for g in &c.near_duplicates {
        let members: Vec<String> = g
            .members
            .iter()
            .map(|m| format!("'{}' ×{}", m.value, m.count))
            .collect();
        writeln!(
            o,
            "  one value spelled {} ways: {}",
            g.members.len(),
            members.join(", ")
        )?;
    }
    for f in &c.flags {
        let text = match f {
            Flag::Constant => "every present cell holds one value".to_string(),
            Flag::NearConstant { share } => {
                format!("one value fills {:.1}% of present cells", share * 100.0)
            }
            Flag::MostlyMissing { share } => format!("{:.1}% of cells are missing", share * 100.0),
            Flag::Contradicted { other } => format!("blanks contradict column {other}"),
        };
        writeln!(o, "  flag: {text}")?;
    }
    let findings: Vec<&Finding> = all.iter().filter(|f| f.column == c.name).collect();
    if !findings.is_empty() {
        writeln!(o, "  findings:")?;
        for f in findings {
            print_finding(o, table, f, c.name.chars().count())?;
        }
    }
    if values.len() > 1 {
        writeln!(o, "  histogram:")?;
        for line in text_histogram(values, 12, 40) {
            writeln!(o, "    {line}")?;
        }
    }
    Ok(0)
}
