//! Tests of the whole module: the HTML report parsed back with an HTML5 parser, the drawings
//! recomputed from the view, and the exports checked against the W3C documents and RFC 4180
//! (reference files in `tests/reference/`, each named beside its check).

use std::collections::BTreeSet;

use scraper::{ElementRef, Html, Selector};
use serde_json::Value;

use super::*;

// ---------------------------------------------------------------------------------------------
// Fixtures
// ---------------------------------------------------------------------------------------------

/// Type-7 quantile of sorted data (Hyndman & Fan 1996), for building fixtures only.
fn q7(sorted: &[f64], p: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = h.ceil() as usize;
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// A numeric summary computed from `values`, with `k` equal-width bins.
fn numeric(values: &[f64], k: usize) -> NumericView {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    let (q1, median, q3) = (q7(&v, 0.25), q7(&v, 0.5), q7(&v, 0.75));
    let iqr = q3 - q1;
    let (lf, uf) = (q1 - 1.5 * iqr, q3 + 1.5 * iqr);
    let (min, max) = (v[0], v[v.len() - 1]);
    let width = (max - min) / k as f64;
    let histogram = (0..k)
        .map(|i| {
            let lo = min + i as f64 * width;
            let hi = if i + 1 == k { max } else { lo + width };
            let count = v
                .iter()
                .filter(|x| **x >= lo && (**x < hi || (i + 1 == k && **x <= hi)))
                .count() as u64;
            Bin { lo, hi, count }
        })
        .collect();
    NumericView {
        mean,
        std_dev: Some(var.sqrt()),
        min,
        q1,
        median,
        q3,
        max,
        lower_inner_fence: lf,
        upper_inner_fence: uf,
        lower_whisker: *v.iter().find(|x| **x >= lf).unwrap(),
        upper_whisker: *v.iter().rev().find(|x| **x <= uf).unwrap(),
        outliers: v.iter().copied().filter(|x| *x < lf || *x > uf).collect(),
        histogram,
    }
}

fn stats(values: &[f64], blank: u64) -> ColumnStats {
    let distinct: BTreeSet<u64> = values.iter().map(|x| x.to_bits()).collect();
    ColumnStats {
        cells: values.len() as u64 + blank,
        present: values.len() as u64,
        blank,
        declared_missing: 0,
        distinct: distinct.len() as u64,
        numeric: Some(numeric(values, 8)),
        levels: vec![],
    }
}

/// A report view whose every string comes from `s(tag)`, so a test can swap in hostile text.
fn view_with(s: &dyn Fn(&str) -> String) -> ReportView {
    let cells: Vec<CellView> = (1..=20)
        .map(|i| CellView {
            row: s(&format!("row{i}")),
            column: s("cellcol"),
            old: if i == 1 {
                None
            } else {
                Some(s(&format!("old{i}")))
            },
            new: Some(s(&format!("new{i}"))),
        })
        .collect();
    let before: Vec<f64> = (0..40)
        .map(|i| (i as f64 * 0.37).sin() * 3.0 + 10.0)
        .chain([-9999.0, -9999.0, 55.0])
        .collect();
    let after: Vec<f64> = before.iter().copied().filter(|x| *x > -9000.0).collect();
    let ph: Vec<f64> = (0..30).map(|i| 6.5 + (i % 7) as f64 * 0.2).collect();
    ReportView {
        title: s("title"),
        table: s("table"),
        generated_at: s("generated_at"),
        extract: ExtractView {
            file_name: s("file_name"),
            blake3: s("extract_blake3"),
            n_bytes: 123_456,
            n_rows: 43,
            n_columns: 4,
            ingest_seq: 1,
        },
        version: VersionView {
            seq: 3,
            id: s("version_id"),
            label: s("version_label"),
            time: s("version_time"),
            version_hash: s("version_hash"),
        },
        verify: VerifyView {
            intact: false,
            checked: s("verify_checked"),
            problems: vec![s("verify_problem")],
            receipt: None,
        },
        // The two fixes below change different cells: 1234 + 1.
        cells_changed: 1235,
        kept: vec![],
        noted: vec![],
        conflicts: vec![],
        commits: vec![
            CommitView {
                seq: 1,
                id: s("commit1_id"),
                author: s("author1"),
                email: Some(s("email1")),
                fingerprint: s("fingerprint1"),
                signature: SignatureStatus::Valid,
                time: s("time1"),
                message: s("message1"),
                kind: s("kind1"),
                summary: None,
                fixes: vec![],
            },
            CommitView {
                seq: 2,
                id: s("commit2_id"),
                author: s("author2"),
                email: None,
                fingerprint: s("fingerprint2"),
                signature: SignatureStatus::ValidUntrusted,
                time: s("time2"),
                message: s("message2"),
                kind: s("kind2"),
                summary: None,
                fixes: vec![
                    FixView {
                        kind: s("fixkind_a"),
                        description: s("description_a"),
                        carried: None,
                        why: s("why_a"),
                        consulted: Some(s("consulted_a")),
                        evidence: vec![EvidenceView {
                            name: s("evidence_name"),
                            blake3: s("evidence_blake3"),
                            n_bytes: 2048,
                        }],
                        n_cells: 1234,
                        cells,
                    },
                    FixView {
                        kind: s("fixkind_b"),
                        description: s("description_b"),
                        carried: None,
                        why: s("why_b"),
                        consulted: None,
                        evidence: vec![],
                        n_cells: 1,
                        cells: vec![CellView {
                            row: s("row_b"),
                            column: s("col_b"),
                            old: Some(String::new()),
                            new: None,
                        }],
                    },
                ],
            },
            CommitView {
                seq: 3,
                id: s("commit3_id"),
                author: s("author3"),
                email: None,
                fingerprint: s("fingerprint3"),
                signature: SignatureStatus::Invalid,
                time: s("time3"),
                message: s("message3"),
                kind: s("kind3"),
                summary: None,
                fixes: vec![FixView {
                    kind: s("fixkind_c"),
                    description: s("description_c"),
                    carried: None,
                    why: s("why_c"),
                    consulted: None,
                    evidence: vec![],
                    n_cells: 0,
                    cells: vec![],
                }],
            },
        ],
        excluded_rows: vec![MarkView {
            target: s("excluded_row"),
            why: s("excluded_why"),
            seq: 2,
        }],
        distrusted_columns: vec![MarkView {
            target: s("distrusted_col"),
            why: s("distrusted_why"),
            seq: 3,
        }],
        columns: vec![
            ColumnView {
                name: s("colname_flow"),
                inferred: s("inferred_flow"),
                distrusted: false,
                cleaning: String::new(),
                before: stats(&before, 2),
                after: stats(&after, 4),
            },
            ColumnView {
                name: s("colname_ph"),
                inferred: s("inferred_ph"),
                distrusted: true,
                cleaning: String::new(),
                before: ColumnStats::default(),
                after: stats(&ph, 0),
            },
            ColumnView {
                name: s("colname_site"),
                inferred: s("inferred_site"),
                distrusted: false,
                cleaning: String::new(),
                before: ColumnStats {
                    cells: 43,
                    present: 43,
                    distinct: 15,
                    levels: (0..15)
                        .map(|i| LevelView {
                            value: s(&format!("level_before{i}")),
                            count: 20 - i,
                        })
                        .collect(),
                    ..ColumnStats::default()
                },
                after: ColumnStats {
                    cells: 43,
                    present: 43,
                    distinct: 2,
                    levels: vec![LevelView {
                        value: s("level_before0"),
                        count: 40,
                    }],
                    ..ColumnStats::default()
                },
            },
        ],
        open_problems: vec![ProblemView {
            column: s("problem_column"),
            severity: s("problem_severity"),
            message: s("problem_message"),
            source: s("problem_source"),
        }],
    }
}

fn plain(tag: &str) -> String {
    tag.to_string()
}

fn hostile(tag: &str) -> String {
    format!(
        "<script>alert('{tag}')</script> \"quoted\" & 'single' <b>{tag}</b> &amp; </td></table>"
    )
}

fn render(view: &ReportView) -> String {
    let mut out = Vec::new();
    render_html(view, &mut out).expect("writing to a Vec cannot fail");
    String::from_utf8(out).expect("the report is UTF-8")
}

fn sel(s: &str) -> Selector {
    Selector::parse(s).expect("valid selector")
}

fn attr_f64(el: &ElementRef, name: &str) -> f64 {
    el.attr(name)
        .unwrap_or_else(|| panic!("attribute {name} on <{}>", el.value().name()))
        .parse()
        .unwrap_or_else(|e| panic!("attribute {name} is a number: {e}"))
}

fn text_of(el: ElementRef) -> String {
    el.text().collect()
}

// ---------------------------------------------------------------------------------------------
// HTML report
// ---------------------------------------------------------------------------------------------

#[test]
fn html_parses_without_errors() {
    let html = render(&view_with(&plain));
    let doc = Html::parse_document(&html);
    assert!(
        doc.errors.is_empty(),
        "HTML5 parse errors: {:?}",
        doc.errors
    );
    assert_eq!(
        doc.root_element().attr("lang"),
        Some("en"),
        "the document declares its language"
    );
    assert_eq!(doc.select(&sel("head > title")).count(), 1);
    assert_eq!(doc.select(&sel("head > style")).count(), 1);
    assert_eq!(doc.select(&sel("h1")).count(), 1);
}

#[test]
fn html_contains_every_reason_and_cell_count() {
    let view = view_with(&plain);
    let doc = Html::parse_document(&render(&view));
    let whys: Vec<String> = doc.select(&sel("p.why")).map(text_of).collect();
    let counts: Vec<(u64, String)> = doc
        .select(&sel(".fix .count"))
        .map(|el| {
            (
                el.attr("data-n-cells").unwrap().parse().unwrap(),
                text_of(el),
            )
        })
        .collect();
    let fixes: Vec<&FixView> = view.commits.iter().flat_map(|c| &c.fixes).collect();
    assert_eq!(whys.len(), fixes.len());
    assert_eq!(counts.len(), fixes.len());
    for ((fix, why), (n, text)) in fixes.iter().zip(&whys).zip(&counts) {
        assert_eq!(why, &format!("Why: {}", fix.why));
        assert_eq!(*n, fix.n_cells);
        assert!(
            text.starts_with(&format!("Changed cells: {}", fmt_count(fix.n_cells))),
            "{text}"
        );
    }
    // 1,234 cells of which 20 are listed: collapsed, with both counts in the summary.
    let summary = doc
        .select(&sel(".fix details > summary"))
        .map(text_of)
        .next()
        .expect("the long cell list is collapsed");
    assert_eq!(summary, "Changed cells: 1,234 (20 listed)");
    let rows = doc
        .select(&sel(".fix details table.cells tbody tr"))
        .count();
    assert_eq!(rows, 20);
    // The one-cell fix is shown openly.
    assert!(
        doc.select(&sel(".fix > table.cells")).count() >= 1,
        "short cell lists are not collapsed"
    );
}

#[test]
fn html_has_no_scripts_and_no_external_references() {
    let html = render(&view_with(&plain));
    let doc = Html::parse_document(&html);
    assert_eq!(doc.select(&sel("script")).count(), 0);
    assert_eq!(
        doc.select(&sel("[src]")).count(),
        0,
        "no src attributes at all"
    );
    for el in doc.select(&sel("[href], [xlink\\:href]")) {
        let href = el.attr("href").unwrap_or_default();
        assert!(href.starts_with('#'), "only in-document links: {href}");
    }
    let lower = html.to_ascii_lowercase();
    for bad in [
        "<script",
        "url(",
        "@import",
        "<link",
        "<iframe",
        "<img",
        "javascript:",
    ] {
        assert!(!lower.contains(bad), "found {bad}");
    }
    // Every in-document link points at an id that exists.
    let ids: BTreeSet<&str> = doc
        .select(&sel("[id]"))
        .filter_map(|e| e.attr("id"))
        .collect();
    for el in doc.select(&sel("a[href]")) {
        let target = &el.attr("href").unwrap()[1..];
        assert!(ids.contains(target), "dangling link #{target}");
    }
}

#[test]
fn html_escapes_hostile_text_in_every_field() {
    let view = view_with(&hostile);
    let html = render(&view);
    let doc = Html::parse_document(&html);
    assert!(doc.errors.is_empty(), "parse errors: {:?}", doc.errors);
    assert_eq!(doc.select(&sel("script")).count(), 0);
    assert_eq!(
        doc.select(&sel("b")).count(),
        0,
        "hostile <b> became markup"
    );
    assert!(!html.contains("<script"));
    // Every field's text survives as text: the DOM holds exactly what the view held.
    let body_text: String = doc.select(&sel("body")).map(text_of).collect();
    let mut tags = vec![
        "title",
        "table",
        "generated_at",
        "file_name",
        "extract_blake3",
        "version_id",
        "version_label",
        "version_time",
        "version_hash",
        "verify_checked",
        "verify_problem",
        "evidence_name",
        "evidence_blake3",
        "cellcol",
        "row_b",
        "col_b",
        "excluded_row",
        "excluded_why",
        "distrusted_col",
        "distrusted_why",
        "colname_flow",
        "inferred_flow",
        "colname_ph",
        "inferred_ph",
        "colname_site",
        "inferred_site",
        "level_before0",
        "level_before14",
        "problem_column",
        "problem_severity",
        "problem_message",
        "problem_source",
        "email1",
    ]
    .into_iter()
    .map(String::from)
    .collect::<Vec<_>>();
    for n in 1..=3 {
        for f in [
            "commit{n}_id",
            "author{n}",
            "fingerprint{n}",
            "time{n}",
            "message{n}",
            "kind{n}",
        ] {
            tags.push(f.replace("{n}", &n.to_string()));
        }
    }
    for x in ["a", "b", "c"] {
        for f in ["fixkind_", "description_", "why_"] {
            tags.push(format!("{f}{x}"));
        }
    }
    tags.push("consulted_a".into());
    for i in 1..=20 {
        tags.push(format!("row{i}"));
        tags.push(format!("new{i}"));
        if i > 1 {
            tags.push(format!("old{i}"));
        }
    }
    for tag in &tags {
        assert!(
            body_text.contains(&hostile(tag)),
            "field {tag} did not survive as text"
        );
    }
    // The title lands in <title> as text too.
    let title: String = doc.select(&sel("head > title")).map(text_of).collect();
    assert_eq!(title, hostile("title"));
}

#[test]
fn html_headings_descend_one_level_at_a_time_and_headers_have_scope() {
    let doc = Html::parse_document(&render(&view_with(&plain)));
    let levels: Vec<u32> = doc
        .select(&sel("h1, h2, h3, h4, h5, h6"))
        .map(|h| h.value().name()[1..].parse().unwrap())
        .collect();
    assert_eq!(levels[0], 1);
    for pair in levels.windows(2) {
        assert!(pair[1] <= pair[0] + 1, "heading skips a level: {levels:?}");
    }
    for th in doc.select(&sel("th")) {
        let scope = th.attr("scope");
        assert!(
            matches!(scope, Some("col" | "row")),
            "th without scope: {}",
            th.html()
        );
    }
    // Every SVG drawing has an accessible name and description.
    for svg in doc.select(&sel("svg[role=img]")) {
        let ids = svg.attr("aria-labelledby").expect("labelled");
        for id in ids.split(' ') {
            let found = doc.select(&sel(&format!("[id=\"{id}\"]"))).count();
            assert_eq!(found, 1, "label {id}");
        }
    }
    // Statuses are words with a shape, not colour alone.
    let statuses: Vec<String> = doc.select(&sel(".status")).map(text_of).collect();
    for word in ["valid", "valid, key not trusted", "INVALID", "NOT INTACT"] {
        assert!(statuses.iter().any(|s| s == word), "{word} in {statuses:?}");
    }
    for st in doc.select(&sel(".status")) {
        assert_eq!(st.select(&sel("svg[aria-hidden=true]")).count(), 1);
    }
    // A table of contents links every section.
    let toc: Vec<&str> = doc
        .select(&sel("nav.toc a"))
        .filter_map(|a| a.attr("href"))
        .collect();
    for target in [
        "#about",
        "#decisions",
        "#marks",
        "#columns",
        "#problems",
        "#col-0",
    ] {
        assert!(toc.contains(&target), "toc lacks {target}");
    }
}

/// WCAG 2.x relative luminance of an sRGB colour `#rrggbb`.
/// Source: W3C, Web Content Accessibility Guidelines (WCAG) 2.1, Recommendation 2018,
/// definitions "relative luminance" and "contrast ratio" (formula from memory).
fn luminance(hex: &str) -> f64 {
    let c = |i: usize| {
        let v = u8::from_str_radix(&hex[i..i + 2], 16).unwrap() as f64 / 255.0;
        if v <= 0.03928 {
            v / 12.92
        } else {
            ((v + 0.055) / 1.055).powf(2.4)
        }
    };
    0.2126 * c(1) + 0.7152 * c(3) + 0.0722 * c(5)
}

#[test]
fn html_text_colours_meet_wcag_aa_contrast_on_white() {
    let html = render(&view_with(&plain));
    let white = luminance("#ffffff");
    for var in ["--ink", "--muted", "--accent", "--ok", "--warn", "--bad"] {
        let at = html.find(&format!("{var}:#")).expect("colour declared") + var.len() + 1;
        let hex = &html[at..at + 7];
        let ratio = (white + 0.05) / (luminance(hex) + 0.05);
        // WCAG 2.1 SC 1.4.3 (AA): at least 4.5:1 for normal text.
        assert!(ratio >= 4.5, "{var} {hex} has contrast {ratio:.2}");
    }
    // The tint behind values must keep muted text readable too.
    let tint = luminance("#f4f2ed");
    let muted = luminance("#4f5a65");
    assert!((tint + 0.05) / (muted + 0.05) >= 4.5);
}

#[test]
fn html_prints() {
    let html = render(&view_with(&plain));
    assert!(html.contains("@media print"));
    assert!(html.contains("@page"));
    assert!(html.contains("break-inside:avoid"));
}

// ---------------------------------------------------------------------------------------------
// SVG drawings
// ---------------------------------------------------------------------------------------------

const PX: f64 = 0.002; // coordinates are printed with three decimals

#[test]
fn box_plots_are_drawn_at_the_scaled_quartiles() {
    let view = view_with(&plain);
    let doc = Html::parse_document(&render(&view));
    let mut n_boxes = 0;
    for (i, col) in view.columns.iter().enumerate() {
        let svgs: Vec<_> = doc.select(&sel(&format!("#col-{i} svg.boxplot"))).collect();
        let has_numeric = col.before.numeric.is_some() || col.after.numeric.is_some();
        assert_eq!(!svgs.is_empty(), has_numeric, "column {i}");
        // Column 0 holds -9999 sentinels before cleaning: its two boxes get their own axes.
        assert_eq!(
            svgs.len(),
            if i == 0 { 2 } else { usize::from(has_numeric) }
        );
        for svg in &svgs {
            let (lo, hi, width) = (
                attr_f64(svg, "data-lo"),
                attr_f64(svg, "data-hi"),
                attr_f64(svg, "data-width"),
            );
            assert_eq!(width, PLOT_WIDTH);
            for g in svg.select(&sel("g.box")) {
                n_boxes += 1;
                let series = g.attr("data-series").unwrap();
                let expected = match series {
                    "before" => col.before.numeric.as_ref(),
                    "after" => col.after.numeric.as_ref(),
                    other => panic!("series {other}"),
                }
                .expect("a box is drawn only for numeric data");
                let (q1, median, q3) = (
                    attr_f64(&g, "data-q1"),
                    attr_f64(&g, "data-median"),
                    attr_f64(&g, "data-q3"),
                );
                assert_eq!(
                    (q1, median, q3),
                    (expected.q1, expected.median, expected.q3)
                );
                assert!(
                    lo <= expected.min && expected.max <= hi,
                    "axis covers the data"
                );
                let rect = g.select(&sel("rect.iqr")).next().expect("box");
                let x = attr_f64(&rect, "x");
                let w = attr_f64(&rect, "width");
                assert!(
                    (x - scale(q1, lo, hi, width)).abs() < PX,
                    "box starts at Q1"
                );
                assert!(
                    (x + w - scale(q3, lo, hi, width)).abs() < PX,
                    "box ends at Q3"
                );
                let line = g.select(&sel("line.median")).next().expect("median");
                assert!((attr_f64(&line, "x1") - scale(median, lo, hi, width)).abs() < PX);
                assert_eq!(attr_f64(&line, "x1"), attr_f64(&line, "x2"));
                let whiskers: Vec<_> = g.select(&sel("line.whisker")).collect();
                assert_eq!(whiskers.len(), 2);
                let lw = scale(expected.lower_whisker, lo, hi, width);
                let uw = scale(expected.upper_whisker, lo, hi, width);
                assert!((attr_f64(&whiskers[0], "x1") - lw).abs() < PX);
                assert!((attr_f64(&whiskers[1], "x2") - uw).abs() < PX);
                // Outliers: each drawn circle sits at the scaled value of a listed outlier.
                for c in g.select(&sel("circle.outlier")) {
                    let v = attr_f64(&c, "data-value");
                    assert!(expected.outliers.contains(&v));
                    assert!((attr_f64(&c, "cx") - scale(v, lo, hi, width)).abs() < PX);
                }
            }
            // The axis has labelled ticks at both ends of the range.
            let labels: Vec<String> = svg.select(&sel(".axis text")).map(text_of).collect();
            assert!(labels.len() >= 2);
            assert_eq!(labels.first().unwrap(), &fmt_num(lo));
            assert_eq!(labels.last().unwrap(), &fmt_num(hi));
        }
    }
    assert_eq!(n_boxes, 3, "flow before and after, pH after");
}

#[test]
fn the_sentinel_column_shows_its_outliers_before_and_none_after() {
    let view = view_with(&plain);
    let doc = Html::parse_document(&render(&view));
    let before = doc
        .select(&sel("#col-0 g.box[data-series=before] circle.outlier"))
        .count();
    let after = doc
        .select(&sel("#col-0 g.box[data-series=after] circle.outlier"))
        .count();
    // -9999 twice draws one circle (same position), 55 another.
    assert_eq!(before, 2);
    assert_eq!(
        after,
        view.columns[0]
            .after
            .numeric
            .as_ref()
            .unwrap()
            .outliers
            .len()
    );
}

#[test]
fn histogram_bar_heights_are_proportional_to_counts() {
    let view = view_with(&plain);
    let doc = Html::parse_document(&render(&view));
    let mut n_hist = 0;
    for (i, col) in view.columns.iter().enumerate() {
        for (class, stats) in [("before", &col.before), ("after", &col.after)] {
            let found: Vec<_> = doc
                .select(&sel(&format!("#col-{i} svg.histogram.{class}")))
                .collect();
            let Some(n) = &stats.numeric else {
                assert!(found.is_empty());
                continue;
            };
            n_hist += 1;
            let svg = found[0];
            let (lo, hi, width) = (
                attr_f64(&svg, "data-lo"),
                attr_f64(&svg, "data-hi"),
                attr_f64(&svg, "data-width"),
            );
            let max = n.histogram.iter().map(|b| b.count).max().unwrap() as f64;
            let bars: Vec<_> = svg.select(&sel("rect.bar")).collect();
            assert_eq!(bars.len(), n.histogram.len());
            for (bar, bin) in bars.iter().zip(&n.histogram) {
                assert_eq!(attr_f64(bar, "data-count"), bin.count as f64);
                let h = attr_f64(bar, "height");
                assert!((h - bin.count as f64 / max * HIST_HEIGHT).abs() < PX);
                // Bars stand on the baseline and span their bin on the shared axis.
                assert!((attr_f64(bar, "y") + h - HIST_HEIGHT).abs() < PX);
                assert!((attr_f64(bar, "x") - scale(bin.lo, lo, hi, width)).abs() < PX);
            }
        }
    }
    assert_eq!(n_hist, 3);
}

#[test]
fn non_finite_summaries_are_not_drawn() {
    let mut view = view_with(&plain);
    let n = view.columns[0].after.numeric.as_mut().unwrap();
    n.median = f64::NAN;
    let doc = Html::parse_document(&render(&view));
    assert!(doc.errors.is_empty());
    assert_eq!(
        doc.select(&sel("#col-0 g.box[data-series=after]")).count(),
        0
    );
    assert_eq!(
        doc.select(&sel("#col-0 g.box[data-series=before]")).count(),
        1
    );
}

// ---------------------------------------------------------------------------------------------
// CSVW
// ---------------------------------------------------------------------------------------------

use crate::testdata::reference;

fn codebook() -> CodebookView {
    CodebookView {
        csv_url: "river-samples.csv".into(),
        title: "River samples, cleaned".into(),
        description: Some("Exported by emend".into()),
        primary_key: vec!["sample id".into()],
        columns: vec![
            CodebookColumn {
                name: "sample id".into(),
                datatype: CsvwDatatype::String,
                null_values: vec![],
                distrusted_reason: None,
                missing_codes: vec![],
                description: None,
            },
            CodebookColumn {
                name: "Flow (m³/s)".into(),
                datatype: CsvwDatatype::Decimal,
                null_values: vec!["".into(), "-9999".into()],
                distrusted_reason: None,
                missing_codes: vec!["-9999".into()],
                description: Some("Discharge at the gauge".into()),
            },
            CodebookColumn {
                name: "_turbidity".into(),
                datatype: CsvwDatatype::Integer,
                null_values: vec![],
                distrusted_reason: Some("sensor fouled from May".into()),
                missing_codes: vec![],
                description: None,
            },
            CodebookColumn {
                name: "sampled_on".into(),
                datatype: CsvwDatatype::Date,
                null_values: vec![],
                distrusted_reason: None,
                missing_codes: vec![],
                description: None,
            },
        ],
        dialect: DialectView::default(),
        source: Some(CodebookSource {
            table: "samples".into(),
            extract_blake3: "ab".repeat(32),
            version_commit: "cd".repeat(32),
            version_hash: "ef".repeat(32),
        }),
    }
}

/// CSVW column names: URI-template `varname` characters (ALPHA / DIGIT / "_" / pct-encoded,
/// with single dots between), and not starting with `_`.
/// Source: Metadata Vocabulary for Tabular Data (W3C REC 2015) §5.6 `name`, as exercised by
/// the CSVW validation tests test130 ("column names are restricted as defined in Variables in
/// [URI-TEMPLATE]") and test131 ("names beginning with '_' are reserved").
fn is_csvw_name(name: &str) -> bool {
    let b = name.as_bytes();
    let mut i = 0;
    while i < b.len() {
        match b[i] {
            b'%' => {
                let hex = |c: u8| c.is_ascii_hexdigit();
                if i + 2 >= b.len() || !hex(b[i + 1]) || !hex(b[i + 2]) {
                    return false;
                }
                i += 3;
            }
            c if c.is_ascii_alphanumeric() || c == b'_' => i += 1,
            _ => return false,
        }
    }
    !name.is_empty() && !name.starts_with('_')
}

#[test]
fn csvw_has_the_required_keys_and_types() {
    let meta = csvw_metadata(&codebook());
    let obj = meta.as_object().unwrap();
    // Source: Metadata Vocabulary §5.2 (top-level `@context`): the CSVW context IRI, or an
    // array of it and an object with only `@base`/`@language`; validation test134 "A metadata
    // document MUST NOT add a new context". Shape as in Example 2, reproduced in
    // tests/reference/csvw_dialect_defaults.json (minimal_table_description_example_2).
    let reference = reference("csvw_dialect_defaults.json");
    let example = &reference["minimal_table_description_example_2"];
    assert_eq!(meta["@context"][0], example["@context"][0]);
    let local = meta["@context"][1].as_object().unwrap();
    assert!(local.keys().all(|k| k == "@base" || k == "@language"));
    // Source: §5.4.1 — `url` is the only required property of a table description
    // (note in csvw_dialect_defaults.json); it is a link property (a string).
    assert!(meta["url"].is_string());
    // Every top-level key of Example 2 appears, with the same JSON type ("_note" is the
    // collector's remark, not part of the example).
    for (k, v) in example
        .as_object()
        .unwrap()
        .iter()
        .filter(|(k, _)| !k.starts_with('_'))
    {
        let ours = &meta[k];
        assert_eq!(
            std::mem::discriminant(ours),
            std::mem::discriminant(v),
            "key {k}"
        );
    }
    // Source: §5.11.1 built-in datatypes (test150: a string datatype must be built in).
    let builtin = ["integer", "decimal", "date", "boolean", "string"];
    let columns = meta["tableSchema"]["columns"].as_array().unwrap();
    assert_eq!(columns.len(), 4);
    let mut names = BTreeSet::new();
    for (c, view) in columns.iter().zip(&codebook().columns) {
        let name = c["name"].as_str().unwrap();
        assert!(is_csvw_name(name), "{name}");
        assert!(names.insert(name), "names are unique (test128)");
        // `titles` keeps the header as written (natural-language property, §5.6).
        assert_eq!(c["titles"], view.name.as_str());
        assert!(builtin.contains(&c["datatype"].as_str().unwrap()));
        // Source: §5.7 Inherited Properties, `null`: "the string or strings used for null
        // values"; default "" (quoted in csvw_dialect_defaults.json, null_annotation).
        let nulls = c["null"].as_array().unwrap();
        assert!(nulls.iter().all(Value::is_string));
        assert!(nulls.contains(&Value::from("")));
    }
    // Source: §5.5 schema `primaryKey`: a column reference, i.e. column name(s) of the schema.
    assert!(names.contains(meta["tableSchema"]["primaryKey"].as_str().unwrap()));
    // Our notes are common properties with absolute-IRI names (§5.8), never new prefixes.
    let csvw_terms = ["@context", "url", "tableSchema", "dialect", "notes"];
    for k in obj.keys() {
        assert!(
            csvw_terms.contains(&k.as_str()) || k.starts_with("dc:") || k.starts_with(EMEND_VOCAB),
            "unexpected top-level key {k}"
        );
    }
    assert_eq!(
        columns[2][format!("{EMEND_VOCAB}distrusted")],
        "sensor fouled from May"
    );
    assert_eq!(columns[1][format!("{EMEND_VOCAB}missingCodes")][0], "-9999");
}

#[test]
fn csvw_dialect_uses_the_recommendation_names_and_types() {
    let meta = csvw_metadata(&codebook());
    let dialect = meta["dialect"].as_object().unwrap();
    // Source: §5.9 Dialect Descriptions, property defaults as listed in
    // tests/reference/csvw_dialect_defaults.json (dialect_property_defaults_section_5_9):
    // every property we write is one of those, with the same JSON type.
    let reference = reference("csvw_dialect_defaults.json");
    let defaults = reference["dialect_property_defaults_section_5_9"]
        .as_object()
        .unwrap();
    for (k, v) in dialect {
        let d = defaults
            .get(k)
            .unwrap_or_else(|| panic!("{k} is a dialect property"));
        assert_eq!(std::mem::discriminant(v), std::mem::discriminant(d), "{k}");
    }
    assert_eq!(dialect["delimiter"], defaults["delimiter"]);
    assert_eq!(dialect["encoding"], defaults["encoding"]);
    assert_eq!(dialect["header"], true);
    // The Recommendation contradicts itself on `trim` (§5.9 prose: true; its printed default
    // dialect: false; see inconsistencies_in_the_recommendation). We never trim, so we say so.
    assert_eq!(dialect["trim"], false);
}

#[test]
fn csvw_primary_key_of_several_columns_is_an_array() {
    let mut view = codebook();
    view.primary_key = vec!["sample id".into(), "sampled_on".into()];
    let meta = csvw_metadata(&view);
    assert_eq!(
        meta["tableSchema"]["primaryKey"],
        serde_json::json!(["sample%20id", "sampled_on"])
    );
    view.primary_key.clear();
    assert!(
        csvw_metadata(&view)["tableSchema"]
            .get("primaryKey")
            .is_none()
    );
}

// ---------------------------------------------------------------------------------------------
// PROV-JSON
// ---------------------------------------------------------------------------------------------

fn prov_view() -> ProvView {
    let ev = EvidenceView {
        name: "email from lab.eml".into(),
        blake3: "e1".repeat(32),
        n_bytes: 4096,
    };
    ProvView {
        namespace: "urn:emend:store:river:".into(),
        table: "samples".into(),
        extracts: vec![ProvExtract {
            blake3: "aa".repeat(32),
            file_name: "samples-2025-03.csv".into(),
            n_bytes: 10_000,
        }],
        commits: vec![
            ProvCommit {
                seq: 1,
                id: "c1".repeat(32),
                kind: "ingest".into(),
                message: "March extract".into(),
                time: "2025-03-02T08:00:00Z".into(),
                signer: "ed25519:AbC/+=".into(),
                signature: SignatureStatus::Valid,
                previous: None,
                extract: Some("aa".repeat(32)),
                evidence: vec![],
                version_hash: "11".repeat(32),
                tags: vec![],
            },
            ProvCommit {
                seq: 2,
                id: "c2".repeat(32),
                kind: "fixes".into(),
                message: "recode sites".into(),
                time: "2025-03-03T09:30:00Z".into(),
                signer: "ed25519:AbC/+=".into(),
                signature: SignatureStatus::Valid,
                previous: Some("c1".repeat(32)),
                extract: None,
                evidence: vec![ev.clone()],
                version_hash: "22".repeat(32),
                tags: vec![],
            },
            ProvCommit {
                seq: 3,
                id: "c3".repeat(32),
                kind: "fixes".into(),
                message: "sentinels to missing".into(),
                time: "2025-03-04T10:00:00Z".into(),
                signer: "ff01".into(),
                signature: SignatureStatus::ValidUntrusted,
                previous: Some("c2".repeat(32)),
                extract: None,
                evidence: vec![ev],
                version_hash: "33".repeat(32),
                tags: vec!["approved-q1".into()],
            },
        ],
        signers: vec![
            ProvSigner {
                fingerprint: "ed25519:AbC/+=".into(),
                name: "Ana Ortiz".into(),
                email: Some("ana@example.org".into()),
                trusted: true,
            },
            ProvSigner {
                fingerprint: "ff01".into(),
                name: "Bo Lind".into(),
                email: None,
                trusted: false,
            },
        ],
    }
}

#[test]
fn prov_json_matches_the_minimal_document_shape() {
    // Source: tests/reference/prov_minimal.json — PROV-JSON (W3C Member Submission,
    // 24 April 2013) top-level keys, and relation key names confirmed with the `prov` 3.2.3
    // package (core_relations.*.prov_json_keys).
    let reference = reference("prov_minimal.json");
    let doc = prov_json(&prov_view());
    let obj = doc.as_object().unwrap();
    let top: Vec<&str> = reference["prov_json_top_level_keys"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    for k in obj.keys() {
        assert!(
            top.contains(&k.as_str()),
            "{k} is a PROV-JSON top-level key"
        );
    }
    let minimal = reference["minimal_document"].as_object().unwrap();
    for k in minimal.keys() {
        assert!(
            obj.contains_key(k),
            "our document has {k}, as the minimal one does"
        );
    }
    let prefixes = obj["prefix"].as_object().unwrap();
    let declared = |qname: &str| {
        let (p, _) = qname.split_once(':').expect("a qualified name");
        p == "prov" || p == "xsd" || prefixes.contains_key(p)
    };
    // Element maps: identifiers are qualified names with declared prefixes, values objects.
    for kind in ["entity", "activity", "agent"] {
        for (id, attrs) in obj[kind].as_object().unwrap() {
            assert!(declared(id), "{kind} id {id}");
            assert!(
                !id.contains('/') && !id.contains('+'),
                "plain local name: {id}"
            );
            for key in attrs.as_object().unwrap().keys() {
                assert!(declared(key), "attribute {key}");
            }
        }
    }
    // Relations: blank ids, keys drawn from the confirmed key list (plus prov:type), the
    // two mandatory keys present, and each reference resolving to an element of the right kind.
    let target_kind = |key: &str| match key {
        "prov:entity" | "prov:generatedEntity" | "prov:usedEntity" => "entity",
        "prov:activity" => "activity",
        "prov:agent" => "agent",
        _ => "",
    };
    for rel in [
        "used",
        "wasGeneratedBy",
        "wasDerivedFrom",
        "wasAssociatedWith",
        "wasAttributedTo",
    ] {
        let allowed: Vec<&str> = reference["core_relations"][rel]["prov_json_keys"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        let required: Vec<&String> = minimal[rel]
            .as_object()
            .unwrap()
            .values()
            .next()
            .unwrap()
            .as_object()
            .unwrap()
            .keys()
            .collect();
        for (id, record) in obj[rel].as_object().unwrap() {
            assert!(id.starts_with("_:"), "{rel} id {id}");
            let record = record.as_object().unwrap();
            for k in record.keys() {
                assert!(
                    allowed.contains(&k.as_str()) || k == "prov:type",
                    "{rel} key {k}"
                );
            }
            for k in &required {
                assert!(record.contains_key(*k), "{rel} {id} lacks {k}");
            }
            for (k, v) in record {
                let kind = target_kind(k);
                if !kind.is_empty() {
                    let target = v.as_str().unwrap();
                    assert!(obj[kind].get(target).is_some(), "{rel}.{k} -> {target}");
                }
            }
        }
    }
    // Agents are typed like the minimal document's person.
    for attrs in obj["agent"].as_object().unwrap().values() {
        assert_eq!(
            attrs["prov:type"],
            minimal["agent"]["ex:alice"]["prov:type"]
        );
    }
}

#[test]
fn prov_json_records_each_commit_as_an_activity_with_its_time() {
    let view = prov_view();
    let doc = prov_json(&view);
    let activities = doc["activity"].as_object().unwrap();
    assert_eq!(activities.len(), view.commits.len());
    for c in &view.commits {
        let a = &activities[&format!("store:commit-{}", c.id)];
        assert_eq!(a["prov:startTime"], c.time.as_str());
        assert_eq!(a["prov:endTime"], c.time.as_str());
    }
    // 1 extract + 3 versions + 1 evidence file (attached twice, one entity).
    assert_eq!(doc["entity"].as_object().unwrap().len(), 5);
    assert_eq!(doc["agent"].as_object().unwrap().len(), 2);
    // Every version was generated by its commit, attributed to its signer, and every commit
    // associated with its signer.
    assert_eq!(doc["wasGeneratedBy"].as_object().unwrap().len(), 3);
    assert_eq!(doc["wasAttributedTo"].as_object().unwrap().len(), 3);
    assert_eq!(doc["wasAssociatedWith"].as_object().unwrap().len(), 3);
    // Derivations: v1 from the extract, v2 from v1, v3 from v2 (the last two revisions).
    let derived = doc["wasDerivedFrom"].as_object().unwrap();
    assert_eq!(derived.len(), 3);
    let revisions = derived
        .values()
        .filter(|d| d["prov:type"]["$"] == "prov:Revision")
        .count();
    assert_eq!(revisions, 2);
    // Used: extract by commit 1; v1 and evidence by commit 2; v2 and evidence by commit 3.
    assert_eq!(doc["used"].as_object().unwrap().len(), 5);
    // A fingerprint with '/', '+' and '=' becomes a percent-encoded local name.
    assert!(
        doc["agent"]
            .get("store:signer-ed25519%3AAbC%2F%2B%3D")
            .is_some()
    );
}

// ---------------------------------------------------------------------------------------------
// Decisions CSV
// ---------------------------------------------------------------------------------------------

/// A strict RFC 4180 reader written for this test, independent of the writer.
fn parse_csv(input: &str) -> Result<Vec<Vec<String>>, String> {
    let mut records = Vec::new();
    let mut record = Vec::new();
    let mut field = String::new();
    let mut chars = input.chars().peekable();
    let mut quoted_field = false;
    let mut at_field_start = true;
    while let Some(c) = chars.next() {
        if at_field_start && c == '"' {
            quoted_field = true;
            at_field_start = false;
            loop {
                match chars.next() {
                    None => return Err("unterminated quote".into()),
                    Some('"') if chars.peek() == Some(&'"') => {
                        chars.next();
                        field.push('"');
                    }
                    Some('"') => break,
                    Some(x) => field.push(x),
                }
            }
            continue;
        }
        at_field_start = false;
        match c {
            ',' => {
                record.push(std::mem::take(&mut field));
                quoted_field = false;
                at_field_start = true;
            }
            '\r' if chars.peek() == Some(&'\n') => {
                chars.next();
                record.push(std::mem::take(&mut field));
                records.push(std::mem::take(&mut record));
                quoted_field = false;
                at_field_start = true;
            }
            '"' => return Err("quote inside an unquoted field".into()),
            _ if quoted_field => return Err("text after a closing quote".into()),
            '\r' | '\n' => return Err("bare line break".into()),
            x => field.push(x),
        }
    }
    if !at_field_start || !record.is_empty() || quoted_field {
        record.push(field);
        records.push(record);
    }
    Ok(records)
}

#[test]
fn the_test_reader_agrees_with_the_rfc_cases() {
    // Source: RFC 4180 §2 rules 1-7 and ABNF; cases in tests/reference/csv_rfc4180_cases.json.
    let reference = reference("csv_rfc4180_cases.json");
    for case in reference["cases"].as_array().unwrap() {
        let id = case["id"].as_str().unwrap();
        let parsed = parse_csv(case["input"].as_str().unwrap());
        if case["valid"].as_bool().unwrap() {
            let mut expected: Vec<Value> = Vec::new();
            if let Some(h) = case.get("expected_header").filter(|h| !h.is_null()) {
                expected.push(h.clone());
            }
            expected.extend(case["expected_records"].as_array().unwrap().iter().cloned());
            assert_eq!(
                serde_json::to_value(parsed.unwrap()).unwrap(),
                Value::Array(expected),
                "{id}"
            );
        } else {
            assert!(parsed.is_err(), "{id} must be rejected");
        }
    }
}

#[test]
fn decisions_csv_round_trips() {
    let awkward = [
        "plain",
        "",
        "comma, inside",
        "quote \" inside",
        "\"starts with a quote",
        "line\r\nbreak",
        "lf\nonly",
        "cr\ronly",
        "  spaces kept  ",
        "=1+2",
        "Ünïcødé ≥ 5 m³/s",
        "<script>alert('x')</script> & more",
    ];
    let rows: Vec<DecisionRow> = awkward
        .iter()
        .enumerate()
        .map(|(i, s)| DecisionRow {
            row: format!("{i}"),
            column: s.to_string(),
            old: if i % 3 == 0 {
                None
            } else {
                Some(s.to_string())
            },
            new: Some(format!("{s}!")),
            fix_kind: "set".into(),
            reason: s.to_string(),
            consulted: if i % 2 == 0 {
                Some(s.to_string())
            } else {
                None
            },
            evidence_blake3: vec!["ab".repeat(32), "cd".repeat(32)][..i % 3].to_vec(),
            commit: "c0".repeat(32),
            author: s.to_string(),
            time: "2025-03-03T09:30:00Z".into(),
        })
        .collect();
    let mut out = Vec::new();
    write_decisions_csv(&rows, &mut out).unwrap();
    let text = String::from_utf8(out).unwrap();
    assert!(
        text.ends_with("\r\n"),
        "records end in CRLF (RFC 4180 §2 rule 1)"
    );
    let parsed = parse_csv(&text).expect("the output is strict RFC 4180");
    assert_eq!(parsed[0], DECISIONS_HEADER);
    assert_eq!(parsed.len(), rows.len() + 1);
    for (got, r) in parsed[1..].iter().zip(&rows) {
        assert_eq!(got.len(), DECISIONS_HEADER.len());
        let expected = [
            r.row.clone(),
            r.column.clone(),
            r.old.clone().unwrap_or_default(),
            r.new.clone().unwrap_or_default(),
            r.fix_kind.clone(),
            r.reason.clone(),
            r.consulted.clone().unwrap_or_default(),
            r.evidence_blake3.join(" "),
            r.commit.clone(),
            r.author.clone(),
            r.time.clone(),
        ];
        assert_eq!(got, &expected);
    }
}

#[test]
fn decisions_csv_of_no_rows_is_just_the_header() {
    let mut out = Vec::new();
    write_decisions_csv(&[], &mut out).unwrap();
    assert_eq!(
        String::from_utf8(out).unwrap(),
        "row,column,old,new,fix_kind,reason,consulted,evidence_blake3,commit,author,time\r\n"
    );
}
