//! The auditor's report: one self-contained HTML5 file.
//!
//! The file has inline CSS (with print rules) and inline SVG, and nothing else: no scripts, no
//! fonts, no images, no links outside the document. It opens in any browser and prints on
//! paper. Every value from the view is escaped with [`Esc`]; no value ever becomes markup,
//! an attribute name, an id or a URL (ids are built from indexes and sequence numbers).
//!
//! Accessibility: the document declares its language, headings descend one level at a time,
//! table headers carry `scope`, colours pass WCAG AA contrast on white, and no meaning is
//! carried by colour alone: every status is a word plus a shape (filled circle = fine,
//! hollow triangle = caution, crossed square = failure, hollow circle = note), and the
//! "before" and "after" series differ in outline (dashed vs solid) and fill (hollow vs filled)
//! as well as in their labels, so the report reads the same in greyscale.

use std::io::{self, Write};

use super::escape::Esc;
use super::svg::{Axis, fmt_num, ranges_differ, write_boxplot, write_histogram};
use super::view::{
    CellView, ColumnStats, ColumnView, CommitView, FixView, LevelView, MarkView, ReportView,
    SignatureStatus,
};

/// Cell lists longer than this are collapsed into a `<details>` element with the count shown.
pub const COLLAPSE_CELLS_AFTER: usize = 8;
/// Level tables show this many levels openly; the rest are collapsed.
pub const LEVELS_SHOWN: usize = 12;

const CSS: &str = r#"
:root{--ink:#1b2026;--muted:#4f5a65;--rule:#c5cbd1;--paper:#fff;--tint:#f4f2ed;--accent:#1f3a5f;--accent-tint:#dce4ee;--ok:#1d5b38;--warn:#7a4600;--bad:#9e1b1b;color-scheme:light}
*{box-sizing:border-box}
html{font:16px/1.5 system-ui,"Segoe UI",Roboto,"Noto Sans","Helvetica Neue",Arial,sans-serif;color:var(--ink);background:var(--paper)}
body{max-width:64rem;margin:0 auto;padding:2rem 1.5rem 4rem}
a{color:var(--accent)}
header.cover{border-top:8px solid var(--accent);padding-top:1rem;margin-bottom:1.5rem}
.kicker{text-transform:uppercase;letter-spacing:.09em;font-size:.78rem;font-weight:600;color:var(--muted);margin:0}
h1{font-size:2rem;line-height:1.2;margin:.25rem 0 .5rem;letter-spacing:-.01em}
h2{font-size:1.4rem;margin:2.75rem 0 .75rem;padding-bottom:.25rem;border-bottom:2px solid var(--ink)}
h2 .no{display:inline-block;min-width:1.8em;color:var(--muted);font-variant-numeric:tabular-nums}
h3{font-size:1.15rem;margin:1.75rem 0 .5rem}
h4{font-size:1rem;margin:0 0 .35rem}
p{margin:.35rem 0 .6rem}
.lede{font-size:1.05rem;max-width:46rem}
code,.hash,.val{font-family:ui-monospace,"SF Mono",Menlo,Consolas,"Liberation Mono",monospace;font-size:.86em}
.hash{word-break:break-all}
.val{white-space:pre-wrap;word-break:break-word;background:var(--tint);padding:0 .2em;border-radius:2px}
.missing{font-style:italic;color:var(--muted)}
table{border-collapse:collapse;width:100%;margin:.5rem 0 1rem;font-size:.92rem;font-variant-numeric:tabular-nums}
caption{text-align:left;font-weight:600;padding:.25rem 0;caption-side:top}
th,td{text-align:left;padding:.3rem .55rem;border-bottom:1px solid var(--rule);vertical-align:top}
thead th{border-bottom:2px solid var(--ink);font-weight:600}
tbody th[scope=row]{font-weight:600;color:var(--muted);width:15rem}
.n{text-align:right}
nav.toc{border:1px solid var(--rule);padding:.75rem 1.25rem;margin:1.5rem 0}
nav.toc h2{border:0;margin:0 0 .25rem;font-size:1rem;padding:0}
nav.toc ol{margin:.25rem 0;padding-left:1.5rem}
nav.toc ol ol{columns:3 12rem;font-size:.9rem}
.glance{display:grid;grid-template-columns:repeat(auto-fit,minmax(8.5rem,1fr));gap:0;margin:1rem 0;border-top:1px solid var(--ink);border-bottom:1px solid var(--ink)}
.glance div{padding:.5rem .75rem;border-left:1px solid var(--rule)}
.glance div:first-child{border-left:0}
.glance dt{font-size:.78rem;text-transform:uppercase;letter-spacing:.06em;color:var(--muted)}
.glance dd{margin:0;font-size:1.6rem;font-weight:650;font-variant-numeric:tabular-nums}
.status{display:inline-flex;align-items:center;gap:.4em;font-weight:650;white-space:nowrap}
.status svg{width:.85em;height:.85em;flex:none}
.status.ok{color:var(--ok)}.status.warn{color:var(--warn)}.status.bad{color:var(--bad)}.status.info{color:var(--muted)}
.commit{border-left:4px solid var(--accent);padding:.1rem 0 .1rem 1.1rem;margin:2rem 0}
.commit h3{margin-top:0}
.seq{display:inline-block;font-variant-numeric:tabular-nums;border:1.5px solid var(--ink);padding:0 .4em;margin-right:.5em;font-size:.85em}
.meta{width:auto;min-width:60%}
.meta th,.meta td{padding:.12rem .55rem;border-bottom:1px dotted var(--rule)}
.stats,.levels{width:auto;min-width:55%}
.stats tbody th[scope=row]{width:auto}
@media screen and (min-width:62rem){.panes{display:grid;grid-template-columns:minmax(17rem,21rem) 1fr;gap:1.75rem;align-items:start}.panes .stats,.panes .levels{width:100%}}
.fix{background:var(--tint);padding:.7rem 1rem .5rem;margin:.9rem 0;border-top:1px solid var(--rule)}
.fix .kind{font-weight:600;text-transform:uppercase;letter-spacing:.06em;font-size:.8rem;color:var(--muted)}
.why{font-size:1.02rem}
.fix table{background:var(--paper)}
details{margin:.4rem 0 .8rem}
summary{cursor:pointer;font-weight:600}
.count{font-weight:600}
.tag{display:inline-block;border:1.5px solid var(--bad);color:var(--bad);padding:0 .35em;font-size:.75rem;font-weight:700;letter-spacing:.08em;vertical-align:middle}
.type{font-weight:400;color:var(--muted);font-size:.9rem}
.column{border-top:1px solid var(--rule);margin-top:2rem}
figure{margin:.75rem 0 1rem}
figure svg{display:block;max-width:100%;height:auto}
figcaption{font-size:.85rem;color:var(--muted);max-width:46rem}
svg text{font:11px system-ui,"Segoe UI",Roboto,Arial,sans-serif;fill:var(--ink)}
svg .rowlabel{font-weight:600}
svg .note{fill:var(--muted);font-style:italic}
svg .axis line,svg .yaxis line{stroke:var(--ink);stroke-width:1}
svg .yaxis .guide{stroke:var(--rule);stroke-dasharray:2 3}
svg .whisker,svg .cap{stroke:var(--ink);stroke-width:1.3}
svg .before .whisker,svg .before .iqr{stroke-dasharray:5 3}
svg .before .iqr{fill:var(--paper);stroke:var(--muted);stroke-width:1.6}
svg .after .iqr{fill:var(--accent-tint);stroke:var(--accent);stroke-width:1.6}
svg .median{stroke:var(--ink);stroke-width:3}
svg .mean{fill:var(--paper);stroke:var(--ink);stroke-width:1.3}
svg .outlier{fill:none;stroke:var(--ink);stroke-width:1.3}
svg.histogram.before .bar{fill:var(--paper);stroke:var(--muted);stroke-width:1}
svg.histogram.after .bar{fill:var(--accent);stroke:var(--paper);stroke-width:.5}
.legend{display:flex;flex-wrap:wrap;gap:.4rem 1.4rem;font-size:.85rem;margin:.5rem 0 1rem;padding:0;list-style:none}
.legend li{display:flex;align-items:center;gap:.4em}
.legend svg{width:34px;height:16px}
footer{margin-top:3rem;padding-top:.75rem;border-top:2px solid var(--ink);font-size:.85rem;color:var(--muted)}
@page{size:A4;margin:16mm 14mm}
@media print{
 html{font-size:10pt}
 body{max-width:none;padding:0}
 *{-webkit-print-color-adjust:exact;print-color-adjust:exact}
 a{color:inherit;text-decoration:none}
 h2,h3,h4{break-after:avoid}
 tr,figure,.fix,.glance,nav.toc{break-inside:avoid}
 .commit{break-inside:auto}
 details::details-content{content-visibility:visible;block-size:auto}
 details>summary{list-style:none}
}
"#;

/// Writes the report for `view` as one self-contained HTML5 document.
///
/// ```
/// # use emend::report::*;
/// # let view = ReportView {
/// #     title: "Audit report: samples".into(), table: "samples".into(),
/// #     generated_at: "2025-03-01T10:00:00Z".into(),
/// #     extract: ExtractView { file_name: "samples.csv".into(), blake3: "ab".repeat(32),
/// #         n_bytes: 10, n_rows: 1, n_columns: 1, ingest_seq: 1 },
/// #     version: VersionView { seq: 1, id: "cd".repeat(32), label: "latest".into(),
/// #         time: "2025-03-01T09:00:00Z".into(), version_hash: "ef".repeat(32) },
/// #     verify: VerifyView { intact: true, checked: "1 commit".into(), problems: vec![], receipt: None },
/// #     commits: vec![], cells_changed: 0, kept: vec![], noted: vec![], conflicts: vec![],
/// #     excluded_rows: vec![], distrusted_columns: vec![],
/// #     columns: vec![], open_problems: vec![],
/// # };
/// let mut html = Vec::new();
/// render_html(&view, &mut html).unwrap();
/// let html = String::from_utf8(html).unwrap();
/// assert!(html.starts_with("<!DOCTYPE html>"));
/// assert!(!html.contains("<script"));
/// ```
pub fn render_html(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, "<!DOCTYPE html>")?;
    writeln!(out, r#"<html lang="en">"#)?;
    writeln!(out, "<head>")?;
    writeln!(out, r#"<meta charset="utf-8">"#)?;
    writeln!(
        out,
        r#"<meta name="viewport" content="width=device-width, initial-scale=1">"#
    )?;
    writeln!(out, r#"<meta name="generator" content="emend">"#)?;
    writeln!(out, "<title>{}</title>", Esc(&view.title))?;
    writeln!(out, "<style>{CSS}</style>")?;
    writeln!(out, "</head>")?;
    writeln!(out, "<body>")?;
    write_cover(view, out)?;
    write_toc(view, out)?;
    writeln!(out, "<main>")?;
    write_about(view, out)?;
    write_decisions(view, out)?;
    write_marks(view, out)?;
    write_columns(view, out)?;
    write_problems(view, out)?;
    writeln!(out, "</main>")?;
    writeln!(
        out,
        "<footer><p>Generated by emend at {} from the store's signed history. \
         The extract is kept byte for byte; every number and drawing above is computed from it \
         and from the recorded fixes. A valid signature shows who recorded a decision, \
         not that the decision was right.</p></footer>",
        Esc(&view.generated_at)
    )?;
    writeln!(out, "</body>")?;
    writeln!(out, "</html>")
}

/// Formats a count with thousands separators, as the report shows it.
///
/// ```
/// use emend::report::fmt_count;
/// assert_eq!(fmt_count(1234567), "1,234,567");
/// assert_eq!(fmt_count(12), "12");
/// ```
pub fn fmt_count(n: u64) -> String {
    let digits = n.to_string();
    let mut s = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            s.push(',');
        }
        s.push(c);
    }
    s
}

#[derive(Clone, Copy)]
enum Tone {
    Ok,
    Warn,
    Bad,
    Info,
}

/// A status word with a shape before it: the shape, the word and the colour all say the same.
fn status(out: &mut dyn Write, tone: Tone, word: &str) -> io::Result<()> {
    let (class, shape) = match tone {
        Tone::Ok => (
            "ok",
            r#"<circle cx="5" cy="5" r="4.5" fill="currentColor"/>"#,
        ),
        Tone::Warn => (
            "warn",
            r#"<path d="M5 .9 9.4 9.2H.6Z" fill="none" stroke="currentColor" stroke-width="1.5" stroke-linejoin="round"/>"#,
        ),
        Tone::Bad => (
            "bad",
            r#"<rect x=".75" y=".75" width="8.5" height="8.5" fill="none" stroke="currentColor" stroke-width="1.5"/><path d="M2.8 2.8 7.2 7.2M7.2 2.8 2.8 7.2" stroke="currentColor" stroke-width="1.5"/>"#,
        ),
        Tone::Info => (
            "info",
            r#"<circle cx="5" cy="5" r="4" fill="none" stroke="currentColor" stroke-width="1.5"/>"#,
        ),
    };
    write!(
        out,
        r#"<span class="status {class}"><svg viewBox="0 0 10 10" aria-hidden="true" focusable="false">{shape}</svg>{}</span>"#,
        Esc(word)
    )
}

fn signature_tone(s: SignatureStatus) -> Tone {
    match s {
        SignatureStatus::Valid => Tone::Ok,
        SignatureStatus::ValidUntrusted => Tone::Warn,
        SignatureStatus::Invalid => Tone::Bad,
    }
}

fn severity_tone(severity: &str) -> Tone {
    match severity.to_ascii_lowercase().as_str() {
        "error" | "fail" | "failure" | "critical" | "high" => Tone::Bad,
        "warning" | "warn" | "medium" => Tone::Warn,
        _ => Tone::Info,
    }
}

/// A cell value: text in a tinted monospace span (so leading and trailing spaces show), or a
/// word in italics for a missing value or empty text.
fn value(out: &mut dyn Write, v: Option<&str>) -> io::Result<()> {
    match v {
        None => write!(out, r#"<span class="missing">missing</span>"#),
        Some("") => write!(out, r#"<span class="missing">empty text</span>"#),
        Some(s) => write!(out, r#"<span class="val">{}</span>"#, Esc(s)),
    }
}

/// `commit 8`, or `approved-q3 (commit 8)` for a tag, or `raw (commit 6)`: the commit number
/// said once.
fn version_words(v: &super::view::VersionView) -> String {
    if v.label == format!("commit {}", v.seq) {
        v.label.clone()
    } else {
        format!("{} (commit {})", v.label, v.seq)
    }
}

fn write_cover(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, r#"<header class="cover">"#)?;
    writeln!(out, r#"<p class="kicker">emend · audit report</p>"#)?;
    writeln!(out, "<h1>{}</h1>", Esc(&view.title))?;
    writeln!(
        out,
        r#"<p class="lede">Table <strong>{}</strong> at <strong>{}</strong>, built from the extract <strong>{}</strong> and every recorded decision up to that commit.</p>"#,
        Esc(&view.table),
        Esc(&version_words(&view.version)),
        Esc(&view.extract.file_name)
    )?;
    let n_fixes: usize = view.commits.iter().map(|c| c.fixes.len()).sum();
    let n_cells = view.cells_changed;
    writeln!(out, r#"<dl class="glance">"#)?;
    for (label, n) in [
        ("commits", view.commits.len() as u64),
        ("fixes", n_fixes as u64),
        ("cells changed", n_cells),
        ("rows excluded", view.excluded_rows.len() as u64),
        ("columns distrusted", view.distrusted_columns.len() as u64),
        ("open problems", view.open_problems.len() as u64),
    ] {
        writeln!(out, "<div><dt>{label}</dt><dd>{}</dd></div>", fmt_count(n))?;
    }
    writeln!(out, "</dl>")?;
    writeln!(out, "</header>")
}

fn write_toc(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, r#"<nav class="toc" aria-labelledby="toc-h">"#)?;
    writeln!(out, r#"<h2 id="toc-h">Contents</h2>"#)?;
    writeln!(out, "<ol>")?;
    writeln!(out, r##"<li><a href="#about">What this is</a></li>"##)?;
    writeln!(
        out,
        r##"<li><a href="#decisions">The decisions</a> ({} commits)</li>"##,
        view.commits.len()
    )?;
    writeln!(
        out,
        r##"<li><a href="#marks">Excluded rows, distrusted columns, kept values and notes</a></li>"##
    )?;
    writeln!(
        out,
        r##"<li><a href="#columns">Columns before and after</a>"##
    )?;
    if !view.columns.is_empty() {
        writeln!(out, "<ol>")?;
        for (i, c) in view.columns.iter().enumerate() {
            writeln!(out, r##"<li><a href="#col-{i}">{}</a></li>"##, Esc(&c.name))?;
        }
        writeln!(out, "</ol>")?;
    }
    writeln!(out, "</li>")?;
    writeln!(
        out,
        r##"<li><a href="#problems">Open problems</a> ({})</li>"##,
        view.open_problems.len()
    )?;
    writeln!(out, "</ol>")?;
    writeln!(out, "</nav>")
}

fn row_th(out: &mut dyn Write, label: &str) -> io::Result<()> {
    write!(out, r#"<tr><th scope="row">{}</th><td>"#, Esc(label))
}

fn write_about(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    let (e, v) = (&view.extract, &view.version);
    writeln!(out, r#"<section aria-labelledby="about">"#)?;
    writeln!(
        out,
        r#"<h2 id="about"><span class="no">1</span>What this is</h2>"#
    )?;
    writeln!(out, "<table>")?;
    writeln!(
        out,
        "<caption>The table, the version and the extract</caption>"
    )?;
    writeln!(out, "<tbody>")?;
    row_th(out, "Table")?;
    writeln!(out, "{}</td></tr>", Esc(&view.table))?;
    row_th(out, "Version")?;
    writeln!(out, "{}</td></tr>", Esc(&version_words(v)))?;
    row_th(out, "Version time")?;
    writeln!(out, "{}</td></tr>", Esc(&v.time))?;
    row_th(out, "Version commit id")?;
    writeln!(out, r#"<span class="hash">{}</span></td></tr>"#, Esc(&v.id))?;
    row_th(out, "Version hash")?;
    writeln!(
        out,
        r#"<span class="hash">{}</span></td></tr>"#,
        Esc(&v.version_hash)
    )?;
    row_th(out, "Extract")?;
    writeln!(
        out,
        "{} — {} bytes, {} rows, {} columns, ingested in commit {}</td></tr>",
        Esc(&e.file_name),
        fmt_count(e.n_bytes),
        fmt_count(e.n_rows),
        fmt_count(e.n_columns),
        e.ingest_seq
    )?;
    row_th(out, "Extract BLAKE3")?;
    writeln!(
        out,
        r#"<span class="hash">{}</span></td></tr>"#,
        Esc(&e.blake3)
    )?;
    row_th(out, "Report generated")?;
    writeln!(out, "{}</td></tr>", Esc(&view.generated_at))?;
    row_th(out, "Verification")?;
    if view.verify.intact {
        status(out, Tone::Ok, "intact")?;
    } else {
        status(out, Tone::Bad, "NOT INTACT")?;
    }
    write!(out, " — checked {}", Esc(&view.verify.checked))?;
    if !view.verify.problems.is_empty() {
        writeln!(out, "<ul>")?;
        for p in &view.verify.problems {
            writeln!(out, "<li>{}</li>", Esc(p))?;
        }
        writeln!(out, "</ul>")?;
    }
    writeln!(out, "</td></tr>")?;
    if let Some(r) = &view.verify.receipt {
        row_th(out, "Receipt")?;
        writeln!(
            out,
            "Signed receipt of the store as this report was made; saved to a file, <code>emend verify --receipt FILE</code> shows whether the history was cut since.<pre class=\"receipt\">{}</pre></td></tr>",
            Esc(r)
        )?;
    }
    writeln!(out, "</tbody></table>")?;
    writeln!(out, "</section>")
}

fn write_decisions(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, r#"<section aria-labelledby="decisions">"#)?;
    writeln!(
        out,
        r#"<h2 id="decisions"><span class="no">2</span>The decisions</h2>"#
    )?;
    writeln!(
        out,
        "<p>The table's whole history up to this version, extract by extract, oldest first. Each \
         fix carries the reason recorded with it, inside the signed commit, and says where it \
         was carried from and to.</p>"
    )?;
    if view.commits.is_empty() {
        writeln!(out, "<p>No commits.</p>")?;
    }
    for c in &view.commits {
        write_commit(c, out)?;
    }
    writeln!(out, "</section>")
}

fn write_commit(c: &CommitView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        r#"<article class="commit" id="commit-{}" aria-labelledby="commit-{}-h">"#,
        c.seq, c.seq
    )?;
    writeln!(
        out,
        r#"<h3 id="commit-{}-h"><span class="seq">No. {}</span>{}</h3>"#,
        c.seq,
        c.seq,
        Esc(&c.message)
    )?;
    writeln!(out, r#"<table class="meta"><tbody>"#)?;
    row_th(out, "Author")?;
    write!(out, "{}", Esc(&c.author))?;
    if let Some(email) = &c.email {
        write!(out, " &lt;{}&gt;", Esc(email))?;
    }
    writeln!(out, "</td></tr>")?;
    row_th(out, "Key fingerprint")?;
    writeln!(
        out,
        r#"<span class="hash">{}</span></td></tr>"#,
        Esc(&c.fingerprint)
    )?;
    row_th(out, "Signature")?;
    status(out, signature_tone(c.signature), c.signature.word())?;
    writeln!(out, "</td></tr>")?;
    row_th(out, "Time")?;
    writeln!(out, "{}</td></tr>", Esc(&c.time))?;
    row_th(out, "Kind")?;
    writeln!(out, "{}</td></tr>", Esc(&c.kind))?;
    row_th(out, "Commit id")?;
    writeln!(out, r#"<span class="hash">{}</span></td></tr>"#, Esc(&c.id))?;
    writeln!(out, "</tbody></table>")?;
    if let Some(s) = &c.summary {
        writeln!(out, r#"<p class="receipt">{}</p>"#, Esc(s))?;
    } else if c.fixes.is_empty() {
        writeln!(out, "<p>No fixes in this commit.</p>")?;
    }
    for (i, f) in c.fixes.iter().enumerate() {
        write_fix(c.seq, i + 1, f, out)?;
    }
    writeln!(out, "</article>")
}

fn write_fix(seq: u64, n: usize, f: &FixView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        r#"<section class="fix" aria-labelledby="fix-{seq}-{n}">"#
    )?;
    writeln!(
        out,
        r#"<h4 id="fix-{seq}-{n}">Fix {seq}.{n} <span class="kind">{}</span></h4>"#,
        Esc(&f.kind)
    )?;
    writeln!(out, "<p>{}</p>", Esc(&f.description))?;
    writeln!(
        out,
        r#"<p class="why"><strong>Why:</strong> {}</p>"#,
        Esc(&f.why)
    )?;
    if let Some(c) = &f.carried {
        writeln!(out, r#"<p class="carried">{}</p>"#, Esc(c))?;
    }
    match &f.consulted {
        Some(who) => writeln!(out, "<p><strong>Consulted:</strong> {}</p>", Esc(who))?,
        None => writeln!(
            out,
            r#"<p><strong>Consulted:</strong> <span class="missing">nobody named</span></p>"#
        )?,
    }
    if f.evidence.is_empty() {
        writeln!(
            out,
            r#"<p><strong>Evidence:</strong> <span class="missing">none attached</span></p>"#
        )?;
    } else {
        writeln!(out, "<p><strong>Evidence:</strong></p><ul>")?;
        for e in &f.evidence {
            writeln!(
                out,
                r#"<li>{} — {} bytes — BLAKE3 <span class="hash">{}</span></li>"#,
                Esc(&e.name),
                fmt_count(e.n_bytes),
                Esc(&e.blake3)
            )?;
        }
        writeln!(out, "</ul>")?;
    }
    let listed = f.cells.len() as u64;
    let count_text = if listed < f.n_cells {
        format!(
            "Changed cells: {} ({} listed)",
            fmt_count(f.n_cells),
            fmt_count(listed)
        )
    } else {
        format!("Changed cells: {}", fmt_count(f.n_cells))
    };
    if f.cells.len() > COLLAPSE_CELLS_AFTER {
        writeln!(
            out,
            r#"<details><summary class="count" data-n-cells="{}">{}</summary>"#,
            f.n_cells,
            Esc(&count_text)
        )?;
        write_cells(&f.cells, out)?;
        writeln!(out, "</details>")?;
    } else {
        writeln!(
            out,
            r#"<p class="count" data-n-cells="{}">{}</p>"#,
            f.n_cells,
            Esc(&count_text)
        )?;
        if !f.cells.is_empty() {
            write_cells(&f.cells, out)?;
        }
    }
    if listed < f.n_cells {
        writeln!(
            out,
            "<p>{} more {} not listed here; the decisions export lists every cell.</p>",
            fmt_count(f.n_cells - listed),
            if f.n_cells - listed == 1 {
                "cell is"
            } else {
                "cells are"
            }
        )?;
    }
    writeln!(out, "</section>")
}

fn write_cells(cells: &[CellView], out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        r#"<table class="cells"><thead><tr><th scope="col">Row</th><th scope="col">Column</th><th scope="col">Before</th><th scope="col">After</th></tr></thead><tbody>"#
    )?;
    for cell in cells {
        write!(
            out,
            "<tr><td>{}</td><td>{}</td><td>",
            Esc(&cell.row),
            Esc(&cell.column)
        )?;
        value(out, cell.old.as_deref())?;
        write!(out, "</td><td>")?;
        value(out, cell.new.as_deref())?;
        writeln!(out, "</td></tr>")?;
    }
    writeln!(out, "</tbody></table>")
}

fn write_marks(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, r#"<section aria-labelledby="marks">"#)?;
    writeln!(
        out,
        r#"<h2 id="marks"><span class="no">3</span>Excluded rows, distrusted columns, kept values and notes</h2>"#
    )?;
    writeln!(
        out,
        r#"<h3 id="owed">Decisions owed ({})</h3>"#,
        view.conflicts.len()
    )?;
    if view.conflicts.is_empty() {
        writeln!(
            out,
            "<p>No carried conflict is open or deferred at this version.</p>"
        )?;
    } else {
        writeln!(out, r#"<ul class="owed">"#)?;
        for c in &view.conflicts {
            writeln!(out, "<li>{}</li>", Esc(c))?;
        }
        writeln!(out, "</ul>")?;
    }
    write_mark_table(
        out,
        "Excluded rows",
        "Row",
        &view.excluded_rows,
        "No rows are excluded at this version.",
    )?;
    write_mark_table(
        out,
        "Distrusted columns",
        "Column",
        &view.distrusted_columns,
        "No columns are distrusted at this version.",
    )?;
    write_mark_table(
        out,
        "Values kept on purpose",
        "Cell",
        &view.kept,
        "No value is marked as kept at this version.",
    )?;
    write_mark_table(
        out,
        "Notes for review",
        "Cell or row",
        &view.noted,
        "No notes at this version.",
    )?;
    writeln!(out, "</section>")
}

fn write_mark_table(
    out: &mut dyn Write,
    heading: &str,
    what: &str,
    marks: &[MarkView],
    none: &str,
) -> io::Result<()> {
    writeln!(out, "<h3>{} ({})</h3>", Esc(heading), marks.len())?;
    if marks.is_empty() {
        return writeln!(out, "<p>{}</p>", Esc(none));
    }
    writeln!(
        out,
        r#"<table><thead><tr><th scope="col">{}</th><th scope="col">Why</th><th scope="col">Commit</th></tr></thead><tbody>"#,
        Esc(what)
    )?;
    for m in marks {
        writeln!(
            out,
            r##"<tr><td><span class="val">{}</span></td><td>{}</td><td><a href="#commit-{}">No. {}</a></td></tr>"##,
            Esc(&m.target),
            Esc(&m.why),
            m.seq,
            m.seq
        )?;
    }
    writeln!(out, "</tbody></table>")
}

fn write_columns(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, r#"<section aria-labelledby="columns">"#)?;
    writeln!(
        out,
        r#"<h2 id="columns"><span class="no">4</span>Columns before and after</h2>"#
    )?;
    writeln!(
        out,
        "<p><em>Before</em> is the raw extract, <em>after</em> is this version. Quartiles are \
         Hyndman–Fan type 7. Whiskers reach the most extreme values inside Tukey's inner fences \
         (1.5 × IQR beyond the quartiles); circles are the values outside them. Before and after \
         box plots share one value axis unless one range is more than twice the other; each \
         histogram has its own axis, printed beneath it.</p>"
    )?;
    write_legend(out)?;
    if view.columns.is_empty() {
        writeln!(out, "<p>No columns.</p>")?;
    }
    for (i, c) in view.columns.iter().enumerate() {
        write_column(i, c, out)?;
    }
    writeln!(out, "</section>")
}

fn write_legend(out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        r#"<ul class="legend" aria-label="How to read the plots">"#
    )?;
    let items = [
        (
            "before",
            r#"<g class="before"><rect class="iqr" x="2" y="3" width="30" height="10"/></g>"#,
            "before: hollow box, dashed outline",
        ),
        (
            "after",
            r#"<g class="after"><rect class="iqr" x="2" y="3" width="30" height="10"/></g>"#,
            "after: filled box, solid outline",
        ),
        (
            "median",
            r#"<line class="median" x1="17" y1="1" x2="17" y2="15"/>"#,
            "median: thick line",
        ),
        (
            "mean",
            r#"<path class="mean" d="M13 8 17 4 21 8 17 12Z"/>"#,
            "mean: diamond",
        ),
        (
            "outlier",
            r#"<circle class="outlier" cx="17" cy="8" r="3.5"/>"#,
            "outside the fences: circle",
        ),
    ];
    for (_, shape, text) in items {
        writeln!(
            out,
            r#"<li><svg viewBox="0 0 34 16" aria-hidden="true" focusable="false">{shape}</svg>{}</li>"#,
            Esc(text)
        )?;
    }
    writeln!(out, "</ul>")
}

/// Reads one count out of a column's statistics.
type CountOf = fn(&ColumnStats) -> u64;

fn opt_num(n: Option<f64>) -> String {
    n.map(fmt_num).unwrap_or_else(|| "—".to_string())
}

fn write_column(i: usize, c: &ColumnView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(
        out,
        r#"<section class="column" id="col-{i}" aria-labelledby="col-{i}-h">"#
    )?;
    write!(
        out,
        r#"<h3 id="col-{i}-h">{} <span class="type">{}</span>"#,
        Esc(&c.name),
        Esc(&c.inferred)
    )?;
    if c.distrusted {
        write!(out, r#" <span class="tag">DISTRUSTED</span>"#)?;
    }
    writeln!(out, "</h3>")?;
    writeln!(out, r#"<p class="cleaning">{}</p>"#, Esc(&c.cleaning))?;
    let (b, a) = (&c.before, &c.after);
    // Two panes on wide screens: the numbers on the left, the drawings (or, for a coded
    // column, the levels) on the right. Print and narrow screens stack them.
    writeln!(out, r#"<div class="panes"><div class="pane">"#)?;
    writeln!(
        out,
        r#"<table class="stats"><caption>Counts and summary of {}</caption><thead><tr><th scope="col">Statistic</th><th scope="col" class="n">Before</th><th scope="col" class="n">After</th></tr></thead><tbody>"#,
        Esc(&c.name)
    )?;
    let counts: [(&str, CountOf); 5] = [
        ("cells", |s| s.cells),
        ("present", |s| s.present),
        ("blank", |s| s.blank),
        ("declared missing", |s| s.declared_missing),
        ("distinct values", |s| s.distinct),
    ];
    for (label, get) in counts {
        writeln!(
            out,
            r#"<tr><th scope="row">{label}</th><td class="n">{}</td><td class="n">{}</td></tr>"#,
            fmt_count(get(b)),
            fmt_count(get(a))
        )?;
    }
    if b.numeric.is_some() || a.numeric.is_some() {
        let (bn, an) = (b.numeric.as_ref(), a.numeric.as_ref());
        let rows: [(&str, Option<f64>, Option<f64>); 11] = [
            ("mean", bn.map(|n| n.mean), an.map(|n| n.mean)),
            (
                "standard deviation",
                bn.and_then(|n| n.std_dev),
                an.and_then(|n| n.std_dev),
            ),
            ("minimum", bn.map(|n| n.min), an.map(|n| n.min)),
            ("first quartile", bn.map(|n| n.q1), an.map(|n| n.q1)),
            ("median", bn.map(|n| n.median), an.map(|n| n.median)),
            ("third quartile", bn.map(|n| n.q3), an.map(|n| n.q3)),
            ("maximum", bn.map(|n| n.max), an.map(|n| n.max)),
            (
                "lower inner fence",
                bn.map(|n| n.lower_inner_fence),
                an.map(|n| n.lower_inner_fence),
            ),
            (
                "upper inner fence",
                bn.map(|n| n.upper_inner_fence),
                an.map(|n| n.upper_inner_fence),
            ),
            (
                "values outside the fences",
                bn.map(|n| n.outliers.len() as f64),
                an.map(|n| n.outliers.len() as f64),
            ),
            (
                "histogram bins",
                bn.map(|n| n.histogram.len() as f64),
                an.map(|n| n.histogram.len() as f64),
            ),
        ];
        for (label, x, y) in rows {
            writeln!(
                out,
                r#"<tr><th scope="row">{label}</th><td class="n">{}</td><td class="n">{}</td></tr>"#,
                Esc(&opt_num(x)),
                Esc(&opt_num(y))
            )?;
        }
    }
    writeln!(out, "</tbody></table>")?;
    writeln!(out, r#"</div><div class="pane">"#)?;

    let summaries: Vec<_> = [b.numeric.as_ref(), a.numeric.as_ref()]
        .into_iter()
        .flatten()
        .collect();
    if let Some(axis) = Axis::covering(&summaries) {
        writeln!(out, "<figure>")?;
        let split = match (&b.numeric, &a.numeric) {
            (Some(x), Some(y)) => ranges_differ(x, y),
            _ => false,
        };
        if split {
            // The raw values span a far wider range than the cleaned ones (sentinels, slips):
            // one box plot per version, each on its own axis, and the caption says so.
            for (tag, label, n) in [("b", "before", &b.numeric), ("a", "after", &a.numeric)] {
                if let Some(n) = n
                    && let Some(own) = Axis::covering(&[n])
                {
                    write_boxplot(
                        out,
                        &format!("col-{i}-box-{tag}"),
                        &format!("{} ({label})", c.name),
                        &own,
                        &[(label, Some(n))],
                    )?;
                }
            }
        } else {
            write_boxplot(
                out,
                &format!("col-{i}-box"),
                &c.name,
                &axis,
                &[
                    ("before", b.numeric.as_ref()),
                    ("after", a.numeric.as_ref()),
                ],
            )?;
        }
        // Each histogram gets its own axis: a few sentinels such as -9999 in the raw data
        // would otherwise squash the cleaned distribution into one bar.
        for (tag, label, stats, filled) in [("b", "before", b, false), ("a", "after", a, true)] {
            if let Some(n) = &stats.numeric
                && let Some(own) = Axis::covering(&[n])
            {
                write_histogram(
                    out,
                    &format!("col-{i}-hist-{tag}"),
                    &format!("Histogram of {}, {label}", c.name),
                    &own,
                    &n.histogram,
                    filled,
                )?;
            }
        }
        let boxes = if split {
            "box plots of before and after, each on its own axis because the raw values span \
             more than twice the range of the cleaned ones (one axis would squash the narrower)"
        } else {
            "box plots (before above, after below) on one value axis"
        };
        writeln!(
            out,
            "<figcaption>{}: {boxes}, then a histogram of each on its own axis. Bar height is \
             proportional to the number of values in the bin.</figcaption>",
            Esc(&c.name)
        )?;
        writeln!(out, "</figure>")?;
    }

    if !b.levels.is_empty() || !a.levels.is_empty() {
        write_levels(&c.name, &b.levels, &a.levels, out)?;
    }
    writeln!(out, "</div></div>")?;
    writeln!(out, "</section>")
}

/// One merged frequency table: levels of the "after" version first (most frequent first),
/// then levels that only existed before (they were recoded away).
fn write_levels(
    name: &str,
    before: &[LevelView],
    after: &[LevelView],
    out: &mut dyn Write,
) -> io::Result<()> {
    let mut rows: Vec<(&str, Option<u64>, Option<u64>)> = Vec::new();
    for l in after {
        let b = before.iter().find(|x| x.value == l.value).map(|x| x.count);
        rows.push((&l.value, b, Some(l.count)));
    }
    for l in before {
        if !after.iter().any(|x| x.value == l.value) {
            rows.push((&l.value, Some(l.count), None));
        }
    }
    let head = r#"<thead><tr><th scope="col">Level</th><th scope="col" class="n">Before</th><th scope="col" class="n">After</th></tr></thead>"#;
    // A level missing from one side's list is not absent: it is not among that side's most
    // frequent levels.
    let not_top = format!(r#"<span class="missing">not in the top {LEVELS_SHOWN}</span>"#);
    let write_rows = |out: &mut dyn Write, rows: &[(&str, Option<u64>, Option<u64>)]| {
        for (v, b, a) in rows {
            write!(out, "<tr><td>")?;
            value(out, Some(v))?;
            writeln!(
                out,
                r#"</td><td class="n">{}</td><td class="n">{}</td></tr>"#,
                b.map(fmt_count).unwrap_or_else(|| not_top.clone()),
                a.map(fmt_count).unwrap_or_else(|| not_top.clone())
            )?;
        }
        io::Result::Ok(())
    };
    writeln!(
        out,
        r#"<table class="levels"><caption>Levels of {}: {} before, {} after</caption>{head}<tbody>"#,
        Esc(name),
        before.len(),
        after.len()
    )?;
    let shown = rows.len().min(LEVELS_SHOWN);
    write_rows(out, &rows[..shown])?;
    writeln!(out, "</tbody></table>")?;
    if rows.len() > shown {
        writeln!(
            out,
            r#"<details><summary>{} more levels</summary><table class="levels">{head}<tbody>"#,
            rows.len() - shown
        )?;
        write_rows(out, &rows[shown..])?;
        writeln!(out, "</tbody></table></details>")?;
    }
    Ok(())
}

fn write_problems(view: &ReportView, out: &mut dyn Write) -> io::Result<()> {
    writeln!(out, r#"<section aria-labelledby="problems">"#)?;
    writeln!(
        out,
        r#"<h2 id="problems"><span class="no">5</span>Open problems</h2>"#
    )?;
    if view.open_problems.is_empty() {
        writeln!(
            out,
            "<p>None: no profile finding or rule failure is present at this version.</p>"
        )?;
        return writeln!(out, "</section>");
    }
    writeln!(
        out,
        "<p>Profile findings and rule failures still present at this version.</p>"
    )?;
    writeln!(
        out,
        r#"<table><thead><tr><th scope="col">Severity</th><th scope="col">Column</th><th scope="col">Source</th><th scope="col">Problem</th></tr></thead><tbody>"#
    )?;
    for p in &view.open_problems {
        write!(out, "<tr><td>")?;
        status(out, severity_tone(&p.severity), &p.severity)?;
        writeln!(
            out,
            "</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            Esc(&p.column),
            Esc(&p.source),
            Esc(&p.message)
        )?;
    }
    writeln!(out, "</tbody></table>")?;
    writeln!(out, "</section>")
}
