//! Plain-text pictures of a column for the terminal: a one-line box plot and a histogram.
//!
//! Pure string building, ASCII only, fixed width; the HTML report draws its own plots.

use super::stats::Quartiles;

/// A one-line ASCII box plot `width` characters wide (at least 5), scaled from min to max:
/// `+` marks min and max, `-` the whiskers, `[` and `]` the quartiles, `=` the box and `|`
/// the median. When every value is equal the marks meet in the middle.
///
/// ```
/// use emend::profile::render::text_boxplot;
/// use emend::profile::stats::Quartiles;
/// let q = Quartiles { min: 1.0, q1: 3.0, median: 5.0, q3: 7.0, max: 9.0 };
/// assert_eq!(text_boxplot(&q, 17), "+---[===|===]---+");
/// ```
pub fn text_boxplot(q: &Quartiles, width: usize) -> String {
    let width = width.max(5);
    let last = width - 1;
    let span = q.max - q.min;
    let pos = |x: f64| -> usize {
        if span > 0.0 && span.is_finite() {
            (((x - q.min) / span) * last as f64)
                .round()
                .clamp(0.0, last as f64) as usize
        } else {
            last / 2
        }
    };
    let mut line = vec![b' '; width];
    let (min, q1, median, q3, max) = (pos(q.min), pos(q.q1), pos(q.median), pos(q.q3), pos(q.max));
    line[min..=max].fill(b'-');
    line[q1..=q3].fill(b'=');
    line[min] = b'+';
    line[max] = b'+';
    line[q1] = b'[';
    line[q3] = b']';
    line[median] = b'|';
    String::from_utf8(line).expect("the picture is ASCII")
}

/// Decimals that show a bin edge of width `step` to about two significant digits.
fn decimals_for(step: f64) -> usize {
    if step <= 0.0 || !step.is_finite() {
        return 0;
    }
    (1.0 - step.log10().floor()).clamp(0.0, 8.0) as usize
}

/// An ASCII histogram of the finite values: `bins` equal-width bins from min to max (the
/// last bin includes max), one line each: `lo .. hi |####    | count`, bars scaled so the
/// fullest bin is `width` characters. No lines for no values or no bins.
///
/// ```
/// use emend::profile::render::text_histogram;
/// let lines = text_histogram(&[1.0, 2.0, 2.0, 3.0, 4.0], 3, 4);
/// assert_eq!(lines, ["1.0 .. 2.0 |##  | 1", "2.0 .. 3.0 |####| 2", "3.0 .. 4.0 |####| 2"]);
/// ```
pub fn text_histogram(values: &[f64], bins: usize, width: usize) -> Vec<String> {
    let finite = || values.iter().copied().filter(|x| x.is_finite());
    let Some(lo) = finite().reduce(f64::min) else {
        return Vec::new();
    };
    if bins == 0 {
        return Vec::new();
    }
    let hi = finite().fold(lo, f64::max);
    let bins = if hi > lo { bins } else { 1 };
    let step = (hi - lo) / bins as f64;
    let mut counts = vec![0u64; bins];
    for x in finite() {
        let i = if step > 0.0 {
            (((x - lo) / step) as usize).min(bins - 1)
        } else {
            0
        };
        counts[i] += 1;
    }
    let fullest = counts.iter().copied().max().unwrap_or(0).max(1);
    let decimals = decimals_for(step);
    let edge = |i: usize| format!("{:.*}", decimals, lo + step * i as f64);
    let edges: Vec<String> = (0..=bins)
        .map(|i| {
            if i == bins {
                format!("{hi:.decimals$}")
            } else {
                edge(i)
            }
        })
        .collect();
    let lw = edges[..bins].iter().map(String::len).max().unwrap_or(0);
    let hw = edges[1..].iter().map(String::len).max().unwrap_or(0);
    counts
        .iter()
        .enumerate()
        .map(|(i, &count)| {
            let mut bar = ((count as f64 / fullest as f64) * width as f64).round() as usize;
            if count > 0 {
                bar = bar.max(1);
            }
            format!(
                "{:>lw$} .. {:<hw$} |{:<width$}| {count}",
                edges[i],
                edges[i + 1],
                "#".repeat(bar)
            )
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn check_box(q: [f64; 5], width: usize, expected: &str) {
        let q = Quartiles {
            min: q[0],
            q1: q[1],
            median: q[2],
            q3: q[3],
            max: q[4],
        };
        assert_eq!(text_boxplot(&q, width), expected);
    }

    #[test]
    fn boxplots() {
        check_box([0.0, 2.5, 5.0, 7.5, 10.0], 9, "+-[=|=]-+");
        check_box([0.0, 2.5, 5.0, 7.5, 10.0], 11, "+--[=|==]-+");
        check_box([0.0, 0.0, 0.0, 1.0, 10.0], 11, "|]--------+");
        check_box([3.0, 3.0, 3.0, 3.0, 3.0], 7, "   |   ");
        check_box([0.0, 1.0, 2.0, 3.0, 4.0], 1, "+[|]+");
    }

    #[test]
    fn histograms() {
        assert!(text_histogram(&[], 5, 10).is_empty());
        assert!(text_histogram(&[1.0], 0, 10).is_empty());
        assert_eq!(text_histogram(&[2.0, 2.0], 4, 3), ["2 .. 2 |###| 2"]);
        assert_eq!(
            text_histogram(&[0.0, 0.5, 1.0, f64::NAN], 2, 2),
            ["0.00 .. 0.50 |# | 1", "0.50 .. 1.00 |##| 2"]
        );
        assert_eq!(
            text_histogram(
                &[
                    0.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0, 100.0
                ],
                2,
                10
            ),
            [" 0 .. 50  |#         | 1", "50 .. 100 |##########| 9"]
        );
    }
}
