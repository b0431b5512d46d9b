//! Inline SVG drawings for the report: a box plot and histograms per numeric column.
//!
//! Every drawing is computed from the numbers in the view (quartiles, fences, whisker ends,
//! outliers, histogram bins); nothing is estimated or smoothed. The before and after boxes of
//! a column share one value axis so they compare directly; each histogram has its own.
//! Coordinates are reproducible: positions are [`scale`] of a value inside a plot area that
//! starts at x = 0 (the area is shifted with a `transform`), and each box carries its numbers
//! in `data-*` attributes so a test can recompute every x position.
//!
//! This module draws no colour that carries meaning on its own: "before" is hollow with a
//! dashed outline, "after" is filled with a solid outline, and each row is labelled in words.

use std::io::{self, Write};

use super::escape::Esc;
use super::view::{Bin, NumericView};

/// Width of the plotting area in SVG user units (the value axis runs from 0 to this).
pub const PLOT_WIDTH: f64 = 560.0;
/// Left margin that holds the row labels; the plot area starts here.
pub const MARGIN_LEFT: f64 = 72.0;
const MARGIN_RIGHT: f64 = 24.0;
const ROW_HEIGHT: f64 = 40.0;
const BOX_HEIGHT: f64 = 20.0;
const AXIS_HEIGHT: f64 = 30.0;
/// Height of the bar area of a histogram.
pub const HIST_HEIGHT: f64 = 90.0;
const MAX_OUTLIER_MARKS: usize = 400;

/// Maps `value` from the interval `[lo, hi]` onto `[0, width]`, linearly.
///
/// When the interval is empty (`hi <= lo`, as for a constant column) every value maps to the
/// middle, `width / 2`.
///
/// ```
/// use emend::report::scale;
/// assert_eq!(scale(5.0, 0.0, 10.0, 200.0), 100.0);
/// assert_eq!(scale(0.0, 0.0, 10.0, 200.0), 0.0);
/// assert_eq!(scale(3.0, 3.0, 3.0, 200.0), 100.0);
/// ```
pub fn scale(value: f64, lo: f64, hi: f64, width: f64) -> f64 {
    if hi > lo {
        (value - lo) / (hi - lo) * width
    } else {
        width / 2.0
    }
}

/// Round-number tick positions covering `[lo, hi]`: steps of 1, 2 or 5 times a power of ten,
/// about `target` of them. The first tick is at or below `lo`, the last at or above `hi`.
///
/// ```
/// use emend::report::nice_ticks;
/// assert_eq!(nice_ticks(0.3, 9.2, 5), vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
/// ```
pub fn nice_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    if !lo.is_finite() || !hi.is_finite() {
        return Vec::new();
    }
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        // A constant column still gets an axis: widen by one unit on each side.
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.1 };
        (lo - pad, hi + pad)
    };
    let raw_step = (hi - lo) / target.max(1) as f64;
    let magnitude = 10f64.powf(raw_step.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * magnitude)
        .find(|s| *s >= raw_step)
        .unwrap_or(10.0 * magnitude);
    let first = (lo / step).floor() as i64;
    let last = (hi / step).ceil() as i64;
    (first..=last)
        .map(|i| {
            let t = i as f64 * step;
            // Snap away binary noise such as 0.30000000000000004.
            let digits = (-step.log10().floor()).max(0.0) as i32 + 1;
            let p = 10f64.powi(digits);
            (t * p).round() / p
        })
        .collect()
}

/// Formats a number for people: integers without a fraction, other values with six
/// significant digits and no trailing zeros.
///
/// ```
/// use emend::report::fmt_num;
/// assert_eq!(fmt_num(12.0), "12");
/// assert_eq!(fmt_num(12.345678), "12.3457");
/// assert_eq!(fmt_num(0.30000000000000004), "0.3");
/// ```
pub fn fmt_num(x: f64) -> String {
    if x.is_nan() {
        return "NaN".to_string();
    }
    if x.is_infinite() {
        return if x > 0.0 { "∞" } else { "−∞" }.to_string();
    }
    if x == x.trunc() && x.abs() < 1e15 {
        return format!("{}", x as i64);
    }
    let decimals = (5 - x.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{x:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" { "0".to_string() } else { s }
}

/// The value range one column's drawings share: the ticks of the widest of before and after.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Value at x = 0.
    pub lo: f64,
    /// Value at x = [`PLOT_WIDTH`].
    pub hi: f64,
    /// Labelled tick positions, from `lo` to `hi`.
    pub ticks: Vec<f64>,
}

impl Axis {
    /// The axis covering the minimum, maximum and every bin edge of the given summaries, widened
    /// to round ticks; `None` when there is nothing finite to draw.
    pub fn covering(summaries: &[&NumericView]) -> Option<Axis> {
        let mut lo = f64::INFINITY;
        let mut hi = f64::NEG_INFINITY;
        for n in summaries {
            let bins = n.histogram.iter().flat_map(|b| [b.lo, b.hi]);
            for v in [n.min, n.max].into_iter().chain(bins) {
                if v.is_finite() {
                    lo = lo.min(v);
                    hi = hi.max(v);
                }
            }
        }
        if !lo.is_finite() || !hi.is_finite() {
            return None;
        }
        let ticks = nice_ticks(lo, hi, 6);
        Some(Axis {
            lo: *ticks.first()?,
            hi: *ticks.last()?,
            ticks,
        })
    }

    /// The x position of `value` inside the plot area.
    pub fn x(&self, value: f64) -> f64 {
        scale(value, self.lo, self.hi, PLOT_WIDTH)
    }
}

/// Whether two summaries span ranges so different (more than [`SPLIT_RATIO`] times) that one
/// shared axis would squash the narrower one to less than half the width; raw sentinels such
/// as -9999, or one shifted decimal, do this.
pub fn ranges_differ(a: &NumericView, b: &NumericView) -> bool {
    let span = |n: &NumericView| (n.max - n.min).abs();
    let (wide, narrow) = if span(a) >= span(b) {
        (span(a), span(b))
    } else {
        (span(b), span(a))
    };
    let floor = 1e-9 * wide.max(1.0);
    wide.is_finite() && wide > SPLIT_RATIO * narrow.max(floor)
}

/// See [`ranges_differ`].
pub const SPLIT_RATIO: f64 = 2.0;

fn all_finite(n: &NumericView) -> bool {
    [
        n.min,
        n.q1,
        n.median,
        n.q3,
        n.max,
        n.lower_whisker,
        n.upper_whisker,
        n.mean,
    ]
    .iter()
    .all(|v| v.is_finite())
}

fn write_axis(out: &mut dyn Write, axis: &Axis, y: f64) -> io::Result<()> {
    writeln!(
        out,
        r#"<g class="axis"><line x1="0" y1="{y:.3}" x2="{PLOT_WIDTH:.3}" y2="{y:.3}"/>"#
    )?;
    for t in &axis.ticks {
        let x = axis.x(*t);
        writeln!(
            out,
            r#"<line x1="{x:.3}" y1="{y:.3}" x2="{x:.3}" y2="{:.3}"/><text x="{x:.3}" y="{:.3}" text-anchor="middle">{}</text>"#,
            y + 5.0,
            y + 18.0,
            Esc(&fmt_num(*t))
        )?;
    }
    writeln!(out, "</g>")
}

/// Writes one box-plot SVG with one row per `(label, summary)` on the shared `axis`; a row
/// whose summary is `None` says "no numeric values". A row labelled `"after"` is drawn filled,
/// any other hollow and dashed.
///
/// `id` must be unique in the document; it names the SVG's `<title>` and `<desc>`.
pub fn write_boxplot(
    out: &mut dyn Write,
    id: &str,
    column: &str,
    axis: &Axis,
    rows: &[(&str, Option<&NumericView>)],
) -> io::Result<()> {
    let n_rows = rows.len() as f64;
    let height = 8.0 + n_rows * ROW_HEIGHT + AXIS_HEIGHT;
    let width = MARGIN_LEFT + PLOT_WIDTH + MARGIN_RIGHT;
    writeln!(
        out,
        r#"<svg class="boxplot" role="img" aria-labelledby="{id}-t {id}-d" viewBox="0 0 {width} {height}" width="{width}" height="{height}" data-lo="{}" data-hi="{}" data-width="{PLOT_WIDTH}" data-left="{MARGIN_LEFT}">"#,
        axis.lo,
        axis.hi,
        id = Esc(id),
    )?;
    writeln!(
        out,
        r#"<title id="{}-t">Box plot of {}, before and after</title>"#,
        Esc(id),
        Esc(column)
    )?;
    write!(out, r#"<desc id="{}-d">"#, Esc(id))?;
    for (label, n) in rows {
        match n {
            Some(n) => write!(
                out,
                "{}: lower whisker {}, Q1 {}, median {}, Q3 {}, upper whisker {}, {} outliers. ",
                Esc(label),
                Esc(&fmt_num(n.lower_whisker)),
                Esc(&fmt_num(n.q1)),
                Esc(&fmt_num(n.median)),
                Esc(&fmt_num(n.q3)),
                Esc(&fmt_num(n.upper_whisker)),
                n.outliers.len()
            )?,
            None => write!(out, "{}: no numeric values. ", Esc(label))?,
        }
    }
    writeln!(out, "</desc>")?;
    for (i, (label, n)) in rows.iter().enumerate() {
        let top = 8.0 + i as f64 * ROW_HEIGHT;
        let mid = top + ROW_HEIGHT / 2.0;
        writeln!(
            out,
            r#"<text class="rowlabel" x="{:.3}" y="{:.3}" text-anchor="end">{}</text>"#,
            MARGIN_LEFT - 10.0,
            mid + 4.0,
            Esc(label)
        )?;
        let Some(n) = n else {
            writeln!(
                out,
                r#"<text class="note" x="{:.3}" y="{:.3}">no numeric values</text>"#,
                MARGIN_LEFT + 4.0,
                mid + 4.0
            )?;
            continue;
        };
        if !all_finite(n) {
            writeln!(
                out,
                r#"<text class="note" x="{:.3}" y="{:.3}">not drawn: summary holds a non-finite number</text>"#,
                MARGIN_LEFT + 4.0,
                mid + 4.0
            )?;
            continue;
        }
        let series = if *label == "after" { "after" } else { "before" };
        let (x_q1, x_med, x_q3) = (axis.x(n.q1), axis.x(n.median), axis.x(n.q3));
        let (x_lw, x_uw, x_mean) = (
            axis.x(n.lower_whisker),
            axis.x(n.upper_whisker),
            axis.x(n.mean),
        );
        let (box_top, box_bottom) = (mid - BOX_HEIGHT / 2.0, mid + BOX_HEIGHT / 2.0);
        writeln!(
            out,
            r#"<g class="box {series}" transform="translate({MARGIN_LEFT},0)" data-series="{}" data-q1="{}" data-median="{}" data-q3="{}" data-lower-whisker="{}" data-upper-whisker="{}" data-mean="{}">"#,
            Esc(label),
            n.q1,
            n.median,
            n.q3,
            n.lower_whisker,
            n.upper_whisker,
            n.mean
        )?;
        writeln!(
            out,
            r#"<line class="whisker" x1="{x_lw:.3}" y1="{mid:.3}" x2="{x_q1:.3}" y2="{mid:.3}"/><line class="whisker" x1="{x_q3:.3}" y1="{mid:.3}" x2="{x_uw:.3}" y2="{mid:.3}"/>"#
        )?;
        writeln!(
            out,
            r#"<line class="cap" x1="{x_lw:.3}" y1="{:.3}" x2="{x_lw:.3}" y2="{:.3}"/><line class="cap" x1="{x_uw:.3}" y1="{:.3}" x2="{x_uw:.3}" y2="{:.3}"/>"#,
            mid - 6.0,
            mid + 6.0,
            mid - 6.0,
            mid + 6.0
        )?;
        writeln!(
            out,
            r#"<rect class="iqr" x="{x_q1:.3}" y="{box_top:.3}" width="{:.3}" height="{BOX_HEIGHT:.3}"/>"#,
            x_q3 - x_q1
        )?;
        writeln!(
            out,
            r#"<line class="median" x1="{x_med:.3}" y1="{box_top:.3}" x2="{x_med:.3}" y2="{box_bottom:.3}"/>"#
        )?;
        // The mean is a small diamond on the centre line, so it reads without colour.
        writeln!(
            out,
            r#"<path class="mean" d="M{:.3} {mid:.3} L{x_mean:.3} {:.3} L{:.3} {mid:.3} L{x_mean:.3} {:.3} Z"/>"#,
            x_mean - 4.0,
            mid - 4.0,
            x_mean + 4.0,
            mid + 4.0
        )?;
        // Outliers: hollow circles, one per distinct half-pixel position, so a column with
        // thousands of identical sentinels stays a small file.
        let mut drawn: Vec<i64> = Vec::new();
        for v in n.outliers.iter().filter(|v| v.is_finite()) {
            let x = axis.x(*v);
            let key = (x * 2.0).round() as i64;
            if drawn.contains(&key) {
                continue;
            }
            if drawn.len() >= MAX_OUTLIER_MARKS {
                break;
            }
            drawn.push(key);
            writeln!(
                out,
                r#"<circle class="outlier" cx="{x:.3}" cy="{mid:.3}" r="3.5" data-value="{v}"/>"#
            )?;
        }
        writeln!(out, "</g>")?;
    }
    writeln!(out, r#"<g transform="translate({MARGIN_LEFT},0)">"#)?;
    write_axis(out, axis, 8.0 + n_rows * ROW_HEIGHT)?;
    writeln!(out, "</g></svg>")
}

/// Writes one histogram SVG on the shared `axis`: a bar per bin, bar height proportional to
/// the bin's count (the tallest bar is [`HIST_HEIGHT`] high), with a count axis on the left.
pub fn write_histogram(
    out: &mut dyn Write,
    id: &str,
    caption: &str,
    axis: &Axis,
    bins: &[Bin],
    filled: bool,
) -> io::Result<()> {
    let top = 10.0;
    let height = top + HIST_HEIGHT + AXIS_HEIGHT;
    let width = MARGIN_LEFT + PLOT_WIDTH + MARGIN_RIGHT;
    let max_count = bins.iter().map(|b| b.count).max().unwrap_or(0);
    let total: u64 = bins.iter().map(|b| b.count).sum();
    writeln!(
        out,
        r#"<svg class="histogram {}" role="img" aria-labelledby="{id}-t {id}-d" viewBox="0 0 {width} {height}" width="{width}" height="{height}" data-lo="{}" data-hi="{}" data-width="{PLOT_WIDTH}" data-bar-height="{HIST_HEIGHT}" data-max-count="{max_count}">"#,
        if filled { "after" } else { "before" },
        axis.lo,
        axis.hi,
        id = Esc(id)
    )?;
    writeln!(
        out,
        r#"<title id="{}-t">{}</title><desc id="{}-d">{} values in {} bins; the tallest bin holds {}.</desc>"#,
        Esc(id),
        Esc(caption),
        Esc(id),
        total,
        bins.len(),
        max_count
    )?;
    writeln!(
        out,
        r#"<text class="rowlabel" x="{:.3}" y="{:.3}" text-anchor="end">{}</text>"#,
        MARGIN_LEFT - 10.0,
        top + HIST_HEIGHT / 2.0,
        Esc(if filled { "after" } else { "before" })
    )?;
    writeln!(out, r#"<g transform="translate({MARGIN_LEFT},{top})">"#)?;
    // Count axis: 0 and the maximum, with a faint guide at the maximum.
    if max_count > 0 {
        writeln!(
            out,
            r#"<g class="yaxis"><line class="guide" x1="0" y1="0" x2="{PLOT_WIDTH:.3}" y2="0"/><text x="-4" y="4" text-anchor="end">{max_count}</text><text x="-4" y="{HIST_HEIGHT:.3}" text-anchor="end">0</text></g>"#
        )?;
    }
    for b in bins {
        if !(b.lo.is_finite() && b.hi.is_finite()) {
            continue;
        }
        let x0 = axis.x(b.lo);
        let x1 = axis.x(b.hi);
        let h = if max_count == 0 {
            0.0
        } else {
            b.count as f64 / max_count as f64 * HIST_HEIGHT
        };
        writeln!(
            out,
            r#"<rect class="bar" x="{x0:.3}" y="{:.3}" width="{:.3}" height="{h:.3}" data-lo="{}" data-hi="{}" data-count="{}"><title>{} to {}: {}</title></rect>"#,
            HIST_HEIGHT - h,
            (x1 - x0).max(0.0),
            b.lo,
            b.hi,
            b.count,
            Esc(&fmt_num(b.lo)),
            Esc(&fmt_num(b.hi)),
            b.count
        )?;
    }
    write_axis(out, axis, HIST_HEIGHT)?;
    writeln!(out, "</g></svg>")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check_ticks(lo: f64, hi: f64, expected: &[f64]) {
        assert_eq!(nice_ticks(lo, hi, 6), expected, "ticks for [{lo}, {hi}]");
    }

    #[test]
    fn ticks_cover_the_range_with_round_steps() {
        check_ticks(0.0, 10.0, &[0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
        check_ticks(0.12, 0.58, &[0.1, 0.2, 0.3, 0.4, 0.5, 0.6]);
        check_ticks(
            -9999.0,
            40.0,
            &[-10000.0, -8000.0, -6000.0, -4000.0, -2000.0, 0.0, 2000.0],
        );
        check_ticks(5.0, 5.0, &[4.4, 4.6, 4.8, 5.0, 5.2, 5.4, 5.6]);
    }

    #[test]
    fn numbers_read_well() {
        for (x, s) in [
            (0.0, "0"),
            (-0.0, "0"),
            (1234.5, "1234.5"),
            (-9999.0, "-9999"),
            (0.000123456, "0.000123456"),
            (f64::NAN, "NaN"),
        ] {
            assert_eq!(fmt_num(x), s);
        }
    }

    #[test]
    fn scale_is_linear_and_handles_an_empty_interval() {
        assert_eq!(scale(-1.0, -1.0, 1.0, 10.0), 0.0);
        assert_eq!(scale(1.0, -1.0, 1.0, 10.0), 10.0);
        assert_eq!(scale(0.5, -1.0, 1.0, 10.0), 7.5);
        assert_eq!(scale(2.0, 2.0, 1.0, 10.0), 5.0);
    }
}
