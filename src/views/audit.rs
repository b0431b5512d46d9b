//! Filling the report and export views from the store: the glue between history and the pure
//! renderers in [`crate::report`].

use super::profiling::{ProfileSink, declared_codes, profile_version};
use crate::error::Result;
use crate::model::{Change, CommitBody, FixAction};
use crate::profile::{ColumnProfile, InferredType, TableOptions, TableProfile};
use crate::query::{Rev, RowSink, VerifyReport, Version, decode, rules_at};
use crate::report::{
    Bin, CellView, CodebookColumn, CodebookSource, CodebookView, ColumnStats, ColumnView,
    CommitView, CsvwDatatype, DecisionRow, DialectView, EvidenceView, ExtractView, FixView,
    LevelView, MarkView, NumericView, ProblemView, ProvCommit, ProvExtract, ProvSigner, ProvView,
    ReportView, SignatureStatus, VerifyView, VersionView,
};
use crate::signing;
use crate::store::{Reader, StoredCommit, TrustList};
use crate::values::number_value;
use std::collections::HashMap;
use std::ops::ControlFlow;

/// How many changed cells of one fix the report lists (the count is always complete).
pub const CELLS_LISTED: usize = 100_000;
const HISTOGRAM_BINS: usize = 20;
const OUTLIERS_LISTED: usize = 50;

fn signature(body: &CommitBody, stored: &StoredCommit, trusted: &TrustList) -> SignatureStatus {
    if !signing::verify(&body.author.key, stored.id.as_bytes(), &stored.signature) {
        SignatureStatus::Invalid
    } else if trusted.trusts(&body.author.key, stored.seq) {
        SignatureStatus::Valid
    } else {
        SignatureStatus::ValidUntrusted
    }
}

fn inferred_name(t: InferredType) -> String {
    format!("{t:?}").to_lowercase()
}

/// The numbers of the given columns of a version, sorted, for box plots and histograms: one
/// pass over the version for all of them.
fn numeric_values(reader: &Reader<'_>, version: &Version, cols: &[usize]) -> Result<Vec<Vec<f64>>> {
    let mut values: Vec<Vec<f64>> = vec![Vec::new(); cols.len()];
    version.for_each_row(reader, |row| {
        if !row.excluded {
            for (k, &c) in cols.iter().enumerate() {
                if let Some(v) = row.cells[c].as_deref().and_then(number_value) {
                    values[k].push(v);
                }
            }
        }
        Ok(ControlFlow::Continue(()))
    })?;
    for v in &mut values {
        v.sort_unstable_by(f64::total_cmp);
    }
    Ok(values)
}

fn stats(p: &ColumnProfile, values: Option<&[f64]>) -> ColumnStats {
    let numeric = match (&p.numeric, values) {
        (Some(n), Some(values)) if !values.is_empty() => {
            let q = &n.quartiles;
            let (lo_f, hi_f) = (n.fences.lower_inner, n.fences.upper_inner);
            let inside: Vec<f64> = values
                .iter()
                .copied()
                .filter(|v| *v >= lo_f && *v <= hi_f)
                .collect();
            let mut outliers: Vec<f64> = values
                .iter()
                .copied()
                .filter(|v| *v < lo_f || *v > hi_f)
                .collect();
            outliers.dedup();
            outliers.truncate(OUTLIERS_LISTED);
            let (min, max) = (q.min, q.max);
            let width = if max > min {
                (max - min) / HISTOGRAM_BINS as f64
            } else {
                1.0
            };
            let mut bins: Vec<Bin> = (0..HISTOGRAM_BINS)
                .map(|i| Bin {
                    lo: min + width * i as f64,
                    hi: min + width * (i + 1) as f64,
                    count: 0,
                })
                .collect();
            for v in values {
                let i = (((v - min) / width) as usize).min(HISTOGRAM_BINS - 1);
                bins[i].count += 1;
            }
            Some(NumericView {
                mean: n.mean,
                std_dev: n.std_dev,
                min,
                q1: q.q1,
                median: q.median,
                q3: q.q3,
                max,
                lower_inner_fence: lo_f,
                upper_inner_fence: hi_f,
                lower_whisker: inside.first().copied().unwrap_or(q.q1),
                upper_whisker: inside.last().copied().unwrap_or(q.q3),
                outliers,
                histogram: bins,
            })
        }
        _ => None,
    };
    ColumnStats {
        cells: p.counts.cells,
        present: p.counts.present,
        blank: p.counts.blank,
        declared_missing: p.counts.declared_missing,
        distinct: p.counts.distinct,
        numeric,
        levels: p
            .top_levels
            .iter()
            .map(|l| LevelView {
                value: l.value.clone(),
                count: l.count,
            })
            .collect(),
    }
}

/// The version hash as rows stream past.
struct HashSink(crate::table::VersionHashBuilder);

impl RowSink for HashSink {
    fn push_batch(&mut self, batch: &crate::model::RowBatch) {
        self.0.batch(batch);
    }
}

fn columns(
    reader: &Reader<'_>,
    before: &Version,
    after: &Version,
    pa: TableProfile,
) -> Result<(Vec<ColumnView>, Vec<ProblemView>)> {
    let pb = profile_version(reader, before, TableOptions::default())?;
    // The numeric columns (numeric before or after), read in one pass per version.
    let numeric: Vec<(usize, Option<usize>)> = pa
        .columns
        .iter()
        .enumerate()
        .filter(|(_, a)| {
            a.numeric.is_some()
                || pb
                    .columns
                    .iter()
                    .any(|b| b.name == a.name && b.numeric.is_some())
        })
        .map(|(i, a)| (i, before.col_idx(&a.name).ok()))
        .collect();
    let after_cols: Vec<usize> = numeric.iter().map(|(i, _)| *i).collect();
    let before_cols: Vec<usize> = numeric.iter().filter_map(|(_, b)| *b).collect();
    let mut after_values = numeric_values(reader, after, &after_cols)?.into_iter();
    let mut before_values = numeric_values(reader, before, &before_cols)?.into_iter();
    let mut values: std::collections::HashMap<usize, (Option<Vec<f64>>, Vec<f64>)> =
        std::collections::HashMap::new();
    for (i, b) in &numeric {
        let va = after_values.next().expect("one list per column");
        let vb = if b.is_some() {
            before_values.next()
        } else {
            None
        };
        values.insert(*i, (vb, va));
    }
    let mut out = Vec::new();
    for (i, a) in pa.columns.iter().enumerate() {
        let b = pb.columns.iter().find(|c| c.name == a.name);
        let (vb, va) = match values.remove(&i) {
            Some((vb, va)) => (vb, Some(va)),
            None => (None, None),
        };
        out.push(ColumnView {
            name: a.name.clone(),
            inferred: inferred_name(a.inferred),
            distrusted: after.is_distrusted(i),
            cleaning: String::new(),
            before: b.map(|b| stats(b, vb.as_deref())).unwrap_or_default(),
            after: stats(a, va.as_deref()),
        });
    }
    // Findings already answered by a decision are not open problems.
    let problems = pa
        .findings
        .iter()
        .filter(|f| f.decided.is_none())
        .map(|f| ProblemView {
            column: f.column.clone(),
            severity: format!("{:?}", f.severity).to_lowercase(),
            message: f.message.clone(),
            source: "profile".into(),
        })
        .collect();
    Ok((out, problems))
}

/// The auditor's report of `table` at `rev` against its raw extract.
pub fn report_view(
    reader: &Reader<'_>,
    table: &str,
    rev: Rev,
    verify: &VerifyReport,
    now: &str,
) -> Result<ReportView> {
    let after = Version::load(reader, table, rev.seq, rev.raw)?;
    let before = Version::load(reader, table, after.ingest_seq, true)?;
    let trusted = reader.trust_list()?;
    let upto = if rev.raw { after.ingest_seq } else { rev.seq };
    let mut commits = Vec::new();
    let mut all_records: Vec<crate::model::FixRecord> = Vec::new();
    let mut excluded = Vec::new();
    let mut distrusted = Vec::new();
    let mut kept = Vec::new();
    let mut noted = Vec::new();
    let mut conflicts: Vec<String> = Vec::new();
    let mut head = None;
    // The table's whole story, from its first extract; marks and counts are those of the
    // version shown (its own extract on).
    let extracts = reader.extracts_of(table)?;
    let first = extracts.first().map_or(after.ingest_seq, |(s, _)| *s);
    // Fixes withdrawn by `upto`: their exclusions and distrust no longer hold.
    let withdrawn = crate::query::withdrawn_fixes(reader, after.ingest_seq, upto)?;
    let mut bodies = Vec::new();
    for seq in first..=upto {
        if let Some(stored) = reader.try_commit(seq)? {
            let body = decode(&stored)?;
            bodies.push((seq, stored, body));
        }
    }
    // Which later commit carried each fix on: (origin commit, fix index) → commit.
    let mut carried_to: HashMap<(u64, u64), u64> = HashMap::new();
    for (seq, _, body) in &bodies {
        if let Change::Fixes(list) = &body.change {
            for r in list.iter().filter(|r| r.fix.table == table) {
                if let Some(o) = r.fix.origins.last() {
                    carried_to.entry((o.seq, o.fix_idx)).or_insert(*seq);
                }
            }
        }
    }
    let next_extract = |seq: u64| {
        extracts
            .iter()
            .map(|(s, _)| *s)
            .find(|s| *s > seq && *s <= upto)
    };
    for (seq, stored, body) in bodies {
        if seq == upto {
            head = Some((stored.id, body.time.clone()));
        }
        let current = seq >= after.ingest_seq;
        if let Change::Fixes(list) = &body.change
            && current
        {
            all_records.extend(list.iter().filter(|r| r.fix.table == table).cloned());
        }
        let fixes: Vec<FixView> = match &body.change {
            Change::Fixes(list) => list
                .iter()
                .enumerate()
                .filter(|(_, r)| r.fix.table == table)
                .map(|(i, r)| {
                    let live = current && !withdrawn.contains(&(seq, i as u64 + 1));
                    if live && r.fix.why.starts_with("carried conflict left open") {
                        conflicts.push(format!(
                            "deferred in commit {seq}: {} — {}",
                            r.fix.action.describe(),
                            r.fix.why
                        ));
                    }
                    let mark_rows = |resolved: &[crate::model::RowId], column: &str| {
                        resolved
                            .iter()
                            .map(|row| MarkView {
                                target: if column.is_empty() {
                                    row.to_string()
                                } else {
                                    format!("{row} {column}")
                                },
                                why: r.fix.why.clone(),
                                seq,
                            })
                            .collect::<Vec<_>>()
                    };
                    match &r.fix.action {
                        _ if !live => {}
                        FixAction::Keep {
                            resolved, column, ..
                        } => kept.extend(mark_rows(resolved, column)),
                        FixAction::Note {
                            resolved, column, ..
                        } => noted.extend(mark_rows(resolved, column.as_deref().unwrap_or(""))),
                        FixAction::Exclude { row } => excluded.push(MarkView {
                            target: row.to_string(),
                            why: r.fix.why.clone(),
                            seq,
                        }),
                        FixAction::ExcludeRows { resolved, .. } => {
                            excluded.extend(resolved.iter().map(|row| MarkView {
                                target: row.to_string(),
                                why: r.fix.why.clone(),
                                seq,
                            }))
                        }
                        FixAction::Distrust { column } => distrusted.push(MarkView {
                            target: column.clone(),
                            why: r.fix.why.clone(),
                            seq,
                        }),
                        _ => {}
                    }
                    let from = r.fix.origins.last().map(|o| o.seq);
                    let on = carried_to.get(&(seq, i as u64)).copied();
                    let carried = match (from, on) {
                        (Some(f), Some(t)) => {
                            Some(format!("carried from commit {f}; carried on in commit {t}"))
                        }
                        (Some(f), None) => Some(format!("carried from commit {f}")),
                        (None, Some(t)) => Some(format!("carried to a later extract in commit {t}")),
                        (None, None) => next_extract(seq).map(|e| {
                            format!("not carried onto the extract of commit {e} (fixed at source, row gone, or left behind)")
                        }),
                    };
                    FixView {
                        kind: r.fix.action.kind().to_string(),
                        description: r.fix.action.describe(),
                        carried,
                        why: r.fix.why.clone(),
                        consulted: r.fix.consulted.clone(),
                        evidence: r
                            .fix
                            .evidence
                            .iter()
                            .map(|e| EvidenceView {
                                name: e.name.clone(),
                                blake3: e.blob.to_hex(),
                                n_bytes: e.n_bytes,
                            })
                            .collect(),
                        n_cells: r.edits.len() as u64,
                        cells: r
                            .edits
                            .iter()
                            .take(CELLS_LISTED)
                            .map(|e| CellView {
                                row: e.row.to_string(),
                                column: e.column.clone(),
                                old: e.old.clone(),
                                new: e.new.clone(),
                            })
                            .collect(),
                    }
                })
                .collect(),
            _ => Vec::new(),
        };
        let relevant = match &body.change {
            Change::Ingest(r) => r.table == table,
            Change::Fixes(_) => !fixes.is_empty(),
            Change::Tag(_) | Change::Trust(_) | Change::Revoke(_) => false,
        };
        if !relevant {
            continue;
        }
        commits.push(CommitView {
            seq,
            id: stored.id.to_hex(),
            author: body.author.name.clone(),
            email: body.author.email.clone(),
            fingerprint: signing::fingerprint(&body.author.key),
            signature: signature(&body, &stored, &trusted),
            time: body.time.clone(),
            message: body.message.clone(),
            kind: match &body.change {
                Change::Ingest(_) => "ingest",
                Change::Fixes(_) => "fixes",
                Change::Tag(_) => "tag",
                Change::Trust(_) => "trust",
                Change::Revoke(_) => "revoke",
            }
            .into(),
            summary: match &body.change {
                Change::Ingest(r) => Some(format!(
                    "extract {}: {} rows × {} columns, {} bytes, BLAKE3 {}",
                    r.file_name,
                    r.n_rows,
                    r.header.len(),
                    r.n_bytes,
                    r.extract.to_hex()
                )),
                _ => None,
            },
            fixes,
        });
    }
    for c in reader
        .conflicts()?
        .iter()
        .filter(|c| c.conflict.fix.table == table)
    {
        conflicts.push(format!(
            "open: {} — {} ({} cells changed at source; 'emend status' lists them)",
            c.conflict.fix.action.describe(),
            c.conflict.fix.why,
            c.conflict.cells.len()
        ));
    }
    // One read of the version shown serves its profile, its check and its hash, side by side.
    let rules = rules_at(reader, table, upto)?
        .and_then(|(_, _, text)| crate::checks::RuleSet::parse(&text).ok());
    let mut profile_sink = ProfileSink::new(reader, &after, TableOptions::default())?;
    let mut check_sink = match &rules {
        Some(r) => super::check::CheckSink::new(&after, r).ok(),
        None => None,
    };
    let mut hash_sink = HashSink(crate::table::VersionHashBuilder::new(after.header()));
    {
        let mut sinks: Vec<&mut dyn RowSink> = vec![&mut profile_sink, &mut hash_sink];
        if let Some(c) = &mut check_sink {
            sinks.push(c);
        }
        crate::query::scan(reader, &after, &mut sinks, &crate::progress::NONE, "report")?;
    }
    let pa = profile_sink.finish(reader, &after)?;
    let version_hash = after.finish_hash(hash_sink.0);
    let (mut columns, mut problems) = columns(reader, &before, &after, pa)?;
    // Each column leads with what the cleaning did to it.
    for c in &mut columns {
        let per: Vec<crate::model::FixRecord> = all_records
            .iter()
            .filter_map(|r| {
                let edits: Vec<_> = r
                    .edits
                    .iter()
                    .filter(|e| e.column == c.name)
                    .cloned()
                    .collect();
                (!edits.is_empty()).then(|| crate::model::FixRecord {
                    fix: r.fix.clone(),
                    edits,
                })
            })
            .collect();
        let q = crate::model::quantity;
        c.cleaning = if per.is_empty() {
            "No fix changed a cell of this column.".to_string()
        } else {
            let names: Vec<String> = per
                .iter()
                .take(3)
                .map(|r| r.fix.action.describe())
                .collect();
            format!(
                "The cleaning changed {} of this column, by {}: {}{}.",
                q(crate::model::net_cells(&per), "cell", "cells"),
                q(per.len() as u64, "fix", "fixes"),
                names.join("; "),
                if per.len() > 3 { "; …" } else { "" }
            )
        };
        if c.distrusted {
            c.cleaning
                .push_str(" The column is distrusted: exports leave it out.");
        }
    }
    if let Some(sink) = check_sink {
        let report = sink.checker.finish();
        for r in report.rules.iter().filter(|r| r.violations > 0) {
            problems.push(ProblemView {
                column: r.id.split('.').next().unwrap_or("").to_string(),
                severity: format!("{:?}", r.severity).to_lowercase(),
                message: format!("{} ({} rows)", r.description, r.violations),
                source: "rules".into(),
            });
        }
    }
    let tags: Vec<String> = reader
        .tags()?
        .into_iter()
        .filter(|(_, _, t)| *t == upto)
        .map(|(n, _, _)| n)
        .collect();
    let (head_id, head_time) = match head {
        Some((id, time)) => (id.to_hex(), time),
        None => (String::new(), String::new()),
    };
    Ok(ReportView {
        title: format!("{table}: cleaning decisions and their effect"),
        table: table.to_string(),
        generated_at: now.to_string(),
        extract: ExtractView {
            file_name: after.def.file_name.clone(),
            blake3: after.def.extract.to_hex(),
            n_bytes: after.def.n_bytes,
            n_rows: after.def.n_rows,
            n_columns: after.def.header.len() as u64,
            ingest_seq: after.ingest_seq,
        },
        version: VersionView {
            seq: upto,
            id: head_id,
            label: if rev.raw {
                "raw".into()
            } else if tags.is_empty() {
                format!("commit {upto}")
            } else {
                tags.join(", ")
            },
            time: head_time,
            version_hash: version_hash.to_hex(),
        },
        verify: VerifyView {
            intact: verify.is_clean(),
            checked: format!(
                "{} commits, {} chunks, {} stored files, {} table versions, {} index rows",
                verify.n_commits,
                verify.n_chunks,
                verify.n_files,
                verify.n_versions,
                verify.n_index_rows
            ),
            problems: verify
                .problems
                .iter()
                .map(|p| format!("{}: {}", p.object, p.what))
                .collect(),
            receipt: None,
        },
        commits,
        cells_changed: crate::model::net_cells(&all_records),
        kept,
        noted,
        conflicts,
        excluded_rows: excluded,
        distrusted_columns: distrusted,
        columns,
        open_problems: problems,
    })
}

/// CSVW metadata for an export of `version` written to `csv_url`.
pub fn codebook_view(
    reader: &Reader<'_>,
    version: &Version,
    csv_url: &str,
    with_distrusted: bool,
) -> Result<CodebookView> {
    let profile = profile_version(reader, version, TableOptions::default())?;
    let codes = declared_codes(reader, version)?;
    let mut reasons: HashMap<String, String> = HashMap::new();
    for seq in version.ingest_seq + 1..=version.seq {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        if let Change::Fixes(list) = decode(&stored)?.change {
            for r in list {
                if let (true, FixAction::Distrust { column }) =
                    (r.fix.table == version.table, r.fix.action)
                {
                    reasons.entry(column).or_insert(r.fix.why);
                }
            }
        }
    }
    let d = &version.def.dialect;
    let columns = version
        .header()
        .iter()
        .enumerate()
        .filter(|(i, _)| with_distrusted || !version.is_distrusted(*i))
        .map(|(i, name)| {
            let p = &profile.columns[i];
            CodebookColumn {
                name: name.clone(),
                datatype: CsvwDatatype::from_inferred(&inferred_name(p.inferred)),
                null_values: vec![String::new()],
                distrusted_reason: if version.is_distrusted(i) {
                    reasons.get(name).cloned()
                } else {
                    None
                },
                missing_codes: codes.get(name).cloned().unwrap_or_default(),
                description: None,
            }
        })
        .collect();
    let (hash, _) = version.hash(reader)?;
    let commit = reader
        .try_commit(version.seq)?
        .map(|c| c.id.to_hex())
        .unwrap_or_default();
    Ok(CodebookView {
        csv_url: csv_url.to_string(),
        title: format!(
            "{} (cleaned with emend, commit {})",
            version.table, version.seq
        ),
        description: None,
        primary_key: version.def.key.clone(),
        columns,
        dialect: DialectView {
            delimiter: d.delimiter as char,
            header: true,
            encoding: "utf-8".into(),
            line_terminator: if d.crlf { "\r\n".into() } else { "\n".into() },
        },
        source: Some(CodebookSource {
            table: version.table.clone(),
            extract_blake3: version.def.extract.to_hex(),
            version_commit: commit,
            version_hash: hash.to_hex(),
        }),
    })
}

/// PROV-JSON lineage of a table up to `upto`.
pub fn prov_view(reader: &Reader<'_>, table: &str, upto: u64) -> Result<ProvView> {
    let trusted = reader.trust_list()?;
    let tags = reader.tags()?;
    let mut extracts = Vec::new();
    let mut commits = Vec::new();
    let mut signers: Vec<ProvSigner> = Vec::new();
    let mut previous: Option<String> = None;
    for seq in 1..=upto {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        let body = decode(&stored)?;
        let hash = match body.versions.iter().find(|v| v.table == table) {
            Some(v) => v.hash.to_hex(),
            None => continue,
        };
        let (kind, extract, evidence) = match &body.change {
            Change::Ingest(r) => {
                extracts.push(ProvExtract {
                    blake3: r.extract.to_hex(),
                    file_name: r.file_name.clone(),
                    n_bytes: r.n_bytes,
                });
                ("ingest", Some(r.extract.to_hex()), Vec::new())
            }
            Change::Fixes(list) => (
                "fixes",
                None,
                list.iter()
                    .filter(|r| r.fix.table == table)
                    .flat_map(|r| r.fix.evidence.iter())
                    .map(|e| EvidenceView {
                        name: e.name.clone(),
                        blake3: e.blob.to_hex(),
                        n_bytes: e.n_bytes,
                    })
                    .collect(),
            ),
            Change::Tag(_) | Change::Trust(_) | Change::Revoke(_) => continue,
        };
        let fp = signing::fingerprint(&body.author.key);
        if !signers.iter().any(|s| s.fingerprint == fp) {
            signers.push(ProvSigner {
                fingerprint: fp.clone(),
                name: body.author.name.clone(),
                email: body.author.email.clone(),
                trusted: trusted.trusts(&body.author.key, stored.seq),
            });
        }
        commits.push(ProvCommit {
            seq,
            id: stored.id.to_hex(),
            kind: kind.into(),
            message: body.message.clone(),
            time: body.time.clone(),
            signer: fp,
            signature: signature(&body, &stored, &trusted),
            previous: if kind == "ingest" {
                None
            } else {
                previous.clone()
            },
            extract,
            evidence,
            version_hash: hash,
            tags: tags
                .iter()
                .filter(|(_, _, t)| *t == seq)
                .map(|(n, _, _)| n.clone())
                .collect(),
        });
        previous = Some(stored.id.to_hex());
    }
    Ok(ProvView {
        namespace: "urn:emend:store:".into(),
        table: table.to_string(),
        extracts,
        commits,
        signers,
    })
}

/// One row per cell edit of `table` from its extract up to `upto`, and one per row a fix
/// excluded, kept a value of or noted (those have no old and new value; a note on a whole row
/// has no column).
pub fn decision_rows(
    reader: &Reader<'_>,
    table: &str,
    ingest_seq: u64,
    upto: u64,
) -> Result<Vec<DecisionRow>> {
    let mut out = Vec::new();
    for seq in ingest_seq + 1..=upto {
        let Some(stored) = reader.try_commit(seq)? else {
            continue;
        };
        let body = decode(&stored)?;
        if let Change::Fixes(list) = &body.change {
            for r in list.iter().filter(|r| r.fix.table == table) {
                let row_of = |row: String, column: String, old, new| DecisionRow {
                    row,
                    column,
                    old,
                    new,
                    fix_kind: r.fix.action.kind().to_string(),
                    reason: r.fix.why.clone(),
                    consulted: r.fix.consulted.clone(),
                    evidence_blake3: r.fix.evidence.iter().map(|e| e.blob.to_hex()).collect(),
                    commit: stored.id.to_hex(),
                    author: body.author.name.clone(),
                    time: body.time.clone(),
                };
                for e in &r.edits {
                    out.push(row_of(
                        e.row.to_string(),
                        e.column.clone(),
                        e.old.clone(),
                        e.new.clone(),
                    ));
                }
                let (rows, column): (Vec<&crate::model::RowId>, Option<&str>) = match &r.fix.action
                {
                    FixAction::Exclude { row } => (vec![row], None),
                    FixAction::ExcludeRows { resolved, .. } => (resolved.iter().collect(), None),
                    FixAction::Keep {
                        resolved, column, ..
                    } => (resolved.iter().collect(), Some(column.as_str())),
                    FixAction::Note {
                        resolved, column, ..
                    } => (resolved.iter().collect(), column.as_deref()),
                    _ => (Vec::new(), None),
                };
                for row in rows {
                    out.push(row_of(
                        row.to_string(),
                        column.unwrap_or_default().to_owned(),
                        None,
                        None,
                    ));
                }
                // Decisions on no row: a column distrusted, rules adopted, a fix withdrawn
                // that changed no cell. One row each, so the export lists every decision.
                let whole = match &r.fix.action {
                    FixAction::Distrust { column } => Some(column.clone()),
                    FixAction::Rules { .. } => Some(String::new()),
                    FixAction::Withdraw { .. } if r.edits.is_empty() => Some(String::new()),
                    _ => None,
                };
                if let Some(column) = whole {
                    out.push(row_of(String::new(), column, None, None));
                }
            }
        }
    }
    Ok(out)
}
