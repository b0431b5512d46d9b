//! Numeric statistics over one column: moments, type-7 quantiles, fences, modified z-scores,
//! suspected sentinels and magnitude errors.
//!
//! Everything here is a function over numbers already read; nothing parses text or decides
//! what a finding is. Mean and standard deviation stream (Welford's update on values shifted
//! by the first value, where the shift is done exactly in decimal when both numbers were
//! written as plain decimals); quantiles need the values themselves, sorted once.

use serde::{Deserialize, Serialize};

use super::types::Number;

/// Powers of ten that are exact in `f64` and `i128`, up to the largest decimal scale kept.
const POW10_F64: [f64; 19] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18,
];

fn pow10_i128(k: u8) -> i128 {
    10i128.pow(u32::from(k))
}

/// Streaming mean and variance.
///
/// Welford's update runs on `x - x₀`, where `x₀` is the first value pushed. When both were
/// written as plain decimals the difference is taken exactly in integers before it becomes an
/// `f64`, so data like `10000000.1, 10000000.3` (NIST StRD NumAcc4) loses nothing to the
/// binary representation of the large common part.
///
/// ```
/// use emend::profile::stats::Moments;
/// use emend::profile::types::parse_number;
/// // Source: NIST StRD univariate, NumAcc1 data and certified mean 10000002, s = 1
/// // (tests/reference/strd_univariate.json).
/// let mut m = Moments::default();
/// for s in ["10000001", "10000003", "10000002"] {
///     m.push(parse_number(s).unwrap().0);
/// }
/// assert_eq!(m.mean(), Some(10000002.0));
/// assert_eq!(m.std_dev(), Some(1.0));
/// ```
#[derive(Clone, Debug, Default)]
pub struct Moments {
    n: u64,
    origin: Option<Number>,
    mean_shifted: f64,
    m2: f64,
}

impl Moments {
    /// Adds one value.
    pub fn push(&mut self, x: Number) {
        let origin = *self.origin.get_or_insert(x);
        let d = shifted(x, origin);
        self.n += 1;
        let delta = d - self.mean_shifted;
        self.mean_shifted += delta / self.n as f64;
        self.m2 += delta * (d - self.mean_shifted);
    }

    /// How many values were pushed.
    pub fn count(&self) -> u64 {
        self.n
    }

    /// The arithmetic mean, if any value was pushed.
    pub fn mean(&self) -> Option<f64> {
        self.origin.map(|o| o.value + self.mean_shifted)
    }

    /// The sample variance with denominator n − 1, if at least two values were pushed.
    pub fn variance(&self) -> Option<f64> {
        (self.n >= 2).then(|| self.m2 / (self.n - 1) as f64)
    }

    /// The sample standard deviation with denominator n − 1, if at least two values were
    /// pushed.
    pub fn std_dev(&self) -> Option<f64> {
        self.variance().map(f64::sqrt)
    }
}

/// `x - origin`, exactly in decimal when both are exact decimals, else in `f64`.
fn shifted(x: Number, origin: Number) -> f64 {
    if let (Some(a), Some(b)) = (x.exact, origin.exact) {
        let k = a.scale.max(b.scale);
        let diff = i128::from(a.mantissa) * pow10_i128(k - a.scale)
            - i128::from(b.mantissa) * pow10_i128(k - b.scale);
        // One rounding to f64, then a correctly rounded division by an exact power of ten.
        diff as f64 / POW10_F64[usize::from(k)]
    } else {
        x.value - origin.value
    }
}

/// The Hyndman–Fan type 7 sample quantile of sorted values at probability `p` in [0, 1]:
/// `h = (n − 1)p`, `Q = x[⌊h⌋] + (h − ⌊h⌋)(x[⌊h⌋ + 1] − x[⌊h⌋])` (0-based). `None` when
/// `sorted` is empty.
///
/// ```
/// use emend::profile::stats::quantile_type7;
/// assert_eq!(quantile_type7(&[1.0, 2.0, 3.0, 4.0], 0.25), Some(1.75));
/// ```
pub fn quantile_type7(sorted: &[f64], p: f64) -> Option<f64> {
    let last = sorted.len().checked_sub(1)?;
    let h = last as f64 * p.clamp(0.0, 1.0);
    let j = h.floor();
    let g = h - j;
    let j = j as usize;
    if j >= last {
        return Some(sorted[last]);
    }
    let (lo, hi) = (sorted[j], sorted[j + 1]);
    Some(if g == 0.0 { lo } else { lo + g * (hi - lo) })
}

/// Minimum, type-7 quartiles and maximum.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Quartiles {
    /// Smallest value.
    pub min: f64,
    /// First quartile (type 7, p = 0.25).
    pub q1: f64,
    /// Median (type 7, p = 0.5).
    pub median: f64,
    /// Third quartile (type 7, p = 0.75).
    pub q3: f64,
    /// Largest value.
    pub max: f64,
}

impl Quartiles {
    /// The five numbers of sorted values; `None` when empty.
    pub fn from_sorted(sorted: &[f64]) -> Option<Quartiles> {
        Some(Quartiles {
            min: *sorted.first()?,
            q1: quantile_type7(sorted, 0.25)?,
            median: quantile_type7(sorted, 0.5)?,
            q3: quantile_type7(sorted, 0.75)?,
            max: *sorted.last()?,
        })
    }

    /// The interquartile range Q3 − Q1.
    pub fn iqr(&self) -> f64 {
        self.q3 - self.q1
    }
}

/// Tukey's fences on type-7 quartiles: inner at 1.5 IQR, outer at 3 IQR beyond Q1 and Q3.
/// Note these use type-7 quartiles, not Tukey's hinges; the two can differ.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Fences {
    /// Q1 − 1.5 IQR.
    pub lower_inner: f64,
    /// Q3 + 1.5 IQR.
    pub upper_inner: f64,
    /// Q1 − 3 IQR.
    pub lower_outer: f64,
    /// Q3 + 3 IQR.
    pub upper_outer: f64,
}

/// Where a value sits relative to the fences; "beyond" is strict.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outside {
    /// Within the inner fences (on them counts as within).
    Inside,
    /// Beyond an inner fence but not beyond the outer fence on that side ("mild").
    Mild,
    /// Beyond an outer fence ("extreme").
    Extreme,
}

impl Fences {
    /// The fences of the given quartiles.
    pub fn tukey(q: &Quartiles) -> Fences {
        let iqr = q.iqr();
        Fences {
            lower_inner: q.q1 - 1.5 * iqr,
            upper_inner: q.q3 + 1.5 * iqr,
            lower_outer: q.q1 - 3.0 * iqr,
            upper_outer: q.q3 + 3.0 * iqr,
        }
    }

    /// Classifies one value.
    pub fn classify(&self, x: f64) -> Outside {
        if x < self.lower_outer || x > self.upper_outer {
            Outside::Extreme
        } else if x < self.lower_inner || x > self.upper_inner {
            Outside::Mild
        } else {
            Outside::Inside
        }
    }
}

/// The median of sorted values (type 7 at p = 0.5); `None` when empty.
pub fn median_sorted(sorted: &[f64]) -> Option<f64> {
    quantile_type7(sorted, 0.5)
}

/// The raw median absolute deviation `median |xᵢ − median|` (not scaled by 1.4826), with the
/// given median; `None` when empty.
pub fn mad(values: &[f64], median: f64) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let mut dev: Vec<f64> = values.iter().map(|x| (x - median).abs()).collect();
    let n = dev.len();
    let (left, mid, _) = dev.select_nth_unstable_by(n / 2, f64::total_cmp);
    let upper = *mid;
    if n % 2 == 1 {
        return Some(upper);
    }
    let lower = left.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    Some(lower + 0.5 * (upper - lower))
}

/// The Iglewicz–Hoaglin constant 0.6745 (≈ Φ⁻¹(0.75)), used as published.
pub const MODIFIED_Z_CONSTANT: f64 = 0.6745;

/// Iglewicz–Hoaglin's cut-off: a value with |M| above this is flagged.
pub const MODIFIED_Z_THRESHOLD: f64 = 3.5;

/// Iglewicz–Hoaglin modified z-scores `Mᵢ = 0.6745 (xᵢ − x̃) / MAD`, in the order given.
///
/// Returns `None` when there are no values or when MAD = 0 (more than half the values equal
/// the median). M is undefined then and this module flags nothing by it, rather than invent
/// a scale: the Tukey fences still apply, and a column that is mostly one value is reported
/// as near-constant.
///
/// ```
/// use emend::profile::stats::modified_z_scores;
/// let z = modified_z_scores(&[1.0, 2.0, 3.0, 4.0, 5.0]).unwrap();
/// assert_eq!(z[4], 1.349);
/// assert_eq!(modified_z_scores(&[5.0, 5.0, 5.0, 6.0]), None);
/// ```
pub fn modified_z_scores(values: &[f64]) -> Option<Vec<f64>> {
    let mut sorted = values.to_vec();
    sorted.sort_unstable_by(f64::total_cmp);
    let median = median_sorted(&sorted)?;
    let mad = mad(&sorted, median)?;
    if mad == 0.0 {
        return None;
    }
    Some(
        values
            .iter()
            .map(|x| MODIFIED_Z_CONSTANT * (x - median) / mad)
            .collect(),
    )
}

/// A value with how many times it occurs.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ValueCount {
    /// The value.
    pub value: f64,
    /// How many cells hold it.
    pub count: u64,
}

/// Distinct values of a sorted slice with their counts, in order.
pub fn run_lengths(sorted: &[f64]) -> Vec<ValueCount> {
    let mut out: Vec<ValueCount> = Vec::new();
    for &value in sorted {
        match out.last_mut() {
            Some(last) if last.value == value => last.count += 1,
            _ => out.push(ValueCount { value, count: 1 }),
        }
    }
    out
}

/// How many times `x` occurs in sorted values.
fn count_of(sorted: &[f64], x: f64) -> u64 {
    let lo = sorted.partition_point(|v| *v < x);
    let hi = sorted.partition_point(|v| *v <= x);
    (hi - lo) as u64
}

/// Common-practice numeric missing codes. Source: tests/reference/missing_values.json,
/// `numeric_sentinel_codes` (common practice, no standard); -1 and 0 are left out because
/// they collide with real values.
pub const SENTINEL_CODES: [f64; 8] = [-9999.0, -999.0, -99.0, -9.0, 9.0, 99.0, 999.0, 9999.0];

/// Sentinel codes that look like missing-value codes in sorted values.
///
/// A code is suspected when it occurs at least `min_count` times and, compared with the
/// other values (all suspected codes removed, at least 4 left), it is beyond their outer
/// Tukey fence, or it is negative while all of them are ≥ 0, or it lies outside their range
/// by at least half that range (9 in a 1–5 scale).
///
/// ```
/// use emend::profile::stats::suspected_sentinels;
/// let v = [-999.0, -999.0, 21.0, 34.0, 40.0, 52.0, 67.0];
/// assert_eq!(suspected_sentinels(&v, 2)[0].value, -999.0);
/// ```
pub fn suspected_sentinels(sorted: &[f64], min_count: u64) -> Vec<ValueCount> {
    let candidates: Vec<ValueCount> = SENTINEL_CODES
        .iter()
        .map(|&value| ValueCount {
            value,
            count: count_of(sorted, value),
        })
        .filter(|c| c.count >= min_count.max(1))
        .collect();
    if candidates.is_empty() {
        return candidates;
    }
    let rest: Vec<f64> = sorted
        .iter()
        .copied()
        .filter(|v| !candidates.iter().any(|c| c.value == *v))
        .collect();
    let Some(q) = Quartiles::from_sorted(&rest).filter(|_| rest.len() >= 4) else {
        return Vec::new();
    };
    let fences = Fences::tukey(&q);
    let range = q.max - q.min;
    candidates
        .into_iter()
        .filter(|c| {
            let x = c.value;
            // With a degenerate spread (Q1 = Q3, as in a column that is nearly all 10) every
            // other value is beyond the fences, so the fences say nothing there.
            (q.iqr() > 0.0 && fences.classify(x) == Outside::Extreme)
                || (x < 0.0 && q.min >= 0.0)
                || (range > 0.0 && (x - q.max >= 0.5 * range || q.min - x >= 0.5 * range))
        })
        .collect()
}

/// A value beyond the inner fences that lands inside them when divided by a power of ten:
/// probably a unit or decimal-point slip.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct MagnitudeError {
    /// The value as found.
    pub value: f64,
    /// How many cells hold it.
    pub count: u64,
    /// The smallest of 10, 100, 1000, 10000 that brings it inside the inner fences.
    pub factor: u32,
    /// `value / factor`.
    pub scaled: f64,
}

/// The factors tried for magnitude errors, smallest first.
pub const MAGNITUDE_FACTORS: [u32; 4] = [10, 100, 1000, 10000];

/// Magnitude errors among sorted values: each distinct value strictly beyond the outer
/// fences that lands inside the inner fences (inclusive) when divided by 10, 100, 1000 or 10000, with
/// the smallest such factor. Values in `skip` (suspected sentinels) are left out.
///
/// ```
/// use emend::profile::stats::{magnitude_errors, Fences, Quartiles};
/// let v = [10.0, 11.0, 12.0, 12.0, 13.0, 14.0, 1200.0];
/// let fences = Fences::tukey(&Quartiles::from_sorted(&v).unwrap());
/// let found = magnitude_errors(&v, &fences, &[]);
/// assert_eq!((found[0].value, found[0].factor, found[0].scaled), (1200.0, 100, 12.0));
/// ```
pub fn magnitude_errors(sorted: &[f64], fences: &Fences, skip: &[f64]) -> Vec<MagnitudeError> {
    let inside = |x: f64| x >= fences.lower_inner && x <= fences.upper_inner;
    // Only values beyond an outer fence ("far out") are candidates: a value just past the
    // inner fence that fits when divided by ten is far more often a real high reading.
    let far_out = |x: f64| x < fences.lower_outer || x > fences.upper_outer;
    run_lengths(sorted)
        .into_iter()
        .filter(|vc| far_out(vc.value) && !skip.contains(&vc.value))
        .filter_map(|vc| {
            MAGNITUDE_FACTORS.iter().find_map(|&factor| {
                let scaled = vc.value / f64::from(factor);
                inside(scaled).then_some(MagnitudeError {
                    value: vc.value,
                    count: vc.count,
                    factor,
                    scaled,
                })
            })
        })
        .collect()
}

/// A distinct value with its modified z-score.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ZScore {
    /// The value.
    pub value: f64,
    /// How many cells hold it.
    pub count: u64,
    /// Its modified z-score M.
    pub z: f64,
}

/// A value beyond the fences, with how far.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct OutsideValue {
    /// The value.
    pub value: f64,
    /// How many cells hold it.
    pub count: u64,
    /// Mild (beyond inner) or extreme (beyond outer).
    pub outside: Outside,
}

/// Every numeric figure of a column.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NumericSummary {
    /// How many numbers.
    pub n: u64,
    /// Arithmetic mean.
    pub mean: f64,
    /// Sample standard deviation (n − 1); `None` below two values.
    pub std_dev: Option<f64>,
    /// Minimum, type-7 quartiles, maximum.
    pub quartiles: Quartiles,
    /// Q3 − Q1.
    pub iqr: f64,
    /// Tukey fences on the type-7 quartiles.
    pub fences: Fences,
    /// Cells strictly beyond an inner fence (this includes the extreme ones).
    pub beyond_inner: u64,
    /// Cells strictly beyond an outer fence.
    pub beyond_outer: u64,
    /// Distinct values beyond the inner fences, farthest from the median first, at most
    /// `max_listed` of them.
    pub outside: Vec<OutsideValue>,
    /// Raw median absolute deviation.
    pub mad: f64,
    /// Distinct values with |M| > 3.5, farthest first, at most `max_listed`; empty when
    /// MAD = 0.
    pub modified_z_flagged: Vec<ZScore>,
    /// Whether modified z-scores were defined (MAD > 0).
    pub modified_z_defined: bool,
    /// Cells (not distinct values) with |M| > 3.5, counted in full.
    #[serde(default)]
    pub modified_z_cells: u64,
    /// Distinct values far out and cut off from the rest (see [`isolated_values`]).
    #[serde(default)]
    pub isolated: Vec<OutsideValue>,
    /// Suspected sentinel codes (see [`suspected_sentinels`]).
    pub sentinels: Vec<ValueCount>,
    /// Suspected magnitude errors, suspected sentinels excluded.
    pub magnitude_errors: Vec<MagnitudeError>,
}

/// Summarises a column's numbers. Sorts `values` in place; `None` when it is empty.
pub fn summarize(
    values: &mut [f64],
    moments: &Moments,
    max_listed: usize,
    sentinel_min_count: u64,
) -> Option<NumericSummary> {
    values.sort_unstable_by(f64::total_cmp);
    let sorted = &*values;
    let quartiles = Quartiles::from_sorted(sorted)?;
    let fences = Fences::tukey(&quartiles);
    let runs = run_lengths(sorted);
    let median = quartiles.median;
    let farthest_first = |a: f64, b: f64| (b - median).abs().total_cmp(&(a - median).abs());

    let mut outside: Vec<OutsideValue> = runs
        .iter()
        .filter_map(|vc| {
            let outside = fences.classify(vc.value);
            (outside != Outside::Inside).then_some(OutsideValue {
                value: vc.value,
                count: vc.count,
                outside,
            })
        })
        .collect();
    let beyond_inner = outside.iter().map(|o| o.count).sum();
    let beyond_outer = outside
        .iter()
        .filter(|o| o.outside == Outside::Extreme)
        .map(|o| o.count)
        .sum();
    outside.sort_by(|a, b| farthest_first(a.value, b.value));
    outside.truncate(max_listed);

    let mad = mad(sorted, median).expect("values are not empty");
    let modified_z_defined = mad > 0.0;
    let mut modified_z_flagged: Vec<ZScore> = if modified_z_defined {
        runs.iter()
            .map(|vc| ZScore {
                value: vc.value,
                count: vc.count,
                z: MODIFIED_Z_CONSTANT * (vc.value - median) / mad,
            })
            .filter(|z| z.z.abs() > MODIFIED_Z_THRESHOLD)
            .collect()
    } else {
        Vec::new()
    };
    let modified_z_cells = modified_z_flagged.iter().map(|z| z.count).sum();
    modified_z_flagged.sort_by(|a, b| farthest_first(a.value, b.value));
    modified_z_flagged.truncate(max_listed);

    let sentinels = suspected_sentinels(sorted, sentinel_min_count);
    let skip: Vec<f64> = sentinels.iter().map(|s| s.value).collect();
    let mut magnitude_errors = magnitude_errors(sorted, &fences, &skip);
    magnitude_errors.truncate(max_listed);

    Some(NumericSummary {
        n: sorted.len() as u64,
        mean: moments.mean()?,
        std_dev: moments.std_dev(),
        quartiles,
        iqr: quartiles.iqr(),
        fences,
        beyond_inner,
        beyond_outer,
        outside,
        mad,
        modified_z_flagged,
        modified_z_defined,
        modified_z_cells,
        isolated: isolated_values(&runs, &quartiles, &fences),
        sentinels,
        magnitude_errors,
    })
}

/// Values that are far out *and* cut off from the rest: beyond Tukey's outer fence (3 IQR past
/// a quartile), separated from every less extreme value by a gap wider than 3 IQR, and few
/// (at most 3 cells, or one in a thousand). A long real tail (incomes, costs, altitudes) has
/// no such gap, so it is not reported; a keying slip (1048 where winds stay below 45) has one.
/// The gap test follows the idea of Dixon's ratio test for a single outlier (Dixon 1950,
/// *Annals of Mathematical Statistics* 21, 488–506: the gap to the nearest value against the
/// spread), with the spread measured by the IQR so that it holds at any sample size; the
/// multipliers are our own. Empty when the IQR is 0 (a degenerate spread has no scale).
///
/// ```
/// use emend::profile::stats::{isolated_values, run_lengths, Fences, Quartiles};
/// let mut v: Vec<f64> = (0..200).map(|i| 5.0 + f64::from(i % 30)).collect();
/// v.push(1048.0);
/// v.sort_by(f64::total_cmp);
/// let q = Quartiles::from_sorted(&v).unwrap();
/// let iso = isolated_values(&run_lengths(&v), &q, &Fences::tukey(&q));
/// assert_eq!(iso.len(), 1);
/// assert_eq!(iso[0].value, 1048.0);
/// ```
pub fn isolated_values(runs: &[ValueCount], q: &Quartiles, fences: &Fences) -> Vec<OutsideValue> {
    let iqr = q.iqr();
    if iqr <= 0.0 || runs.is_empty() {
        return Vec::new();
    }
    let n: u64 = runs.iter().map(|r| r.count).sum();
    let most = 3.max(n / 1000);
    let gap = 3.0 * iqr;
    let mut out = Vec::new();
    // Upper side: walk up from the body; everything past the first wide gap is cut off.
    let side = |ordered: &mut dyn Iterator<Item = &ValueCount>, beyond: &dyn Fn(f64) -> bool| {
        let mut previous: Option<f64> = None;
        let mut cut: Vec<OutsideValue> = Vec::new();
        let mut after_gap = false;
        for r in ordered {
            if let Some(p) = previous
                && beyond(r.value)
                && (r.value - p).abs() > gap
            {
                after_gap = true;
            }
            if after_gap {
                cut.push(OutsideValue {
                    value: r.value,
                    count: r.count,
                    outside: Outside::Extreme,
                });
            }
            previous = Some(r.value);
        }
        cut
    };
    let upper = side(&mut runs.iter(), &|x| x > fences.upper_outer);
    let lower = side(&mut runs.iter().rev(), &|x| x < fences.lower_outer);
    for part in [upper, lower] {
        if !part.is_empty() && part.iter().map(|o| o.count).sum::<u64>() <= most {
            out.extend(part);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::types::parse_number;
    use crate::testdata::{exact_fraction, f64s, reference, strd_data};

    /// Log relative error, NIST's count of agreeing significant digits, capped at 15.
    fn lre(computed: f64, certified: f64) -> f64 {
        if computed == certified {
            return 15.0;
        }
        let rel = if certified == 0.0 {
            computed.abs()
        } else {
            ((computed - certified) / certified).abs()
        };
        (-rel.log10()).min(15.0)
    }

    fn moments_of(lines: &[&str]) -> Moments {
        let mut m = Moments::default();
        for line in lines {
            m.push(parse_number(line).expect("StRD data lines are numbers").0);
        }
        m
    }

    fn check_strd(name: &str, min_mean_lre: f64, min_sd_lre: f64) {
        let json = reference("strd_univariate.json");
        let set = &json["datasets"][name];
        let lines = strd_data(set["file"].as_str().expect("file name"));
        assert_eq!(lines.len() as u64, set["n"].as_u64().unwrap(), "{name}: n");
        let refs: Vec<&str> = lines.iter().map(String::as_str).collect();
        let m = moments_of(&refs);
        let certified = &set["certified"];
        let mean: f64 = certified["mean"].as_str().unwrap().parse().unwrap();
        let sd: f64 = certified["std_dev_n_minus_1"]
            .as_str()
            .unwrap()
            .parse()
            .unwrap();
        let (mean_lre, sd_lre) = (lre(m.mean().unwrap(), mean), lre(m.std_dev().unwrap(), sd));
        println!("{name}: mean LRE {mean_lre:.1}, s LRE {sd_lre:.1}");
        assert!(mean_lre >= min_mean_lre, "{name}: mean LRE {mean_lre}");
        assert!(sd_lre >= min_sd_lre, "{name}: s LRE {sd_lre}");
    }

    // Source: NIST StRD univariate summary statistics, certified mean and s (denominator
    // n − 1) in tests/reference/strd_univariate.json, data from tests/reference/strd/*.dat
    // (line 61 on). LRE = −log10(|computed − certified| / |certified|), capped at 15.
    // Achieved: 15 (the cap) for every mean and s, except PiDigits s at 14.9; the
    // thresholds below are those figures rounded down to whole digits.
    #[test]
    fn strd_numacc1() {
        // Certified mean 10000002, s 1 (exact by construction).
        check_strd("NumAcc1", 15.0, 15.0);
    }

    #[test]
    fn strd_numacc2() {
        // Certified mean 1.2, s 0.1 (exact by construction).
        check_strd("NumAcc2", 15.0, 14.0);
    }

    #[test]
    fn strd_numacc3() {
        // Certified mean 1000000.2, s 0.1 (exact by construction).
        check_strd("NumAcc3", 15.0, 14.0);
    }

    #[test]
    fn strd_numacc4() {
        // Certified mean 10000000.2, s 0.1 (exact by construction); plain float64 two-pass
        // reaches only about 7 digits of s here.
        check_strd("NumAcc4", 15.0, 14.0);
    }

    #[test]
    fn strd_observed_datasets() {
        // Certified to 15 significant digits: Lew mean -177.435 s 277.332168044316; Lottery
        // mean 518.958715596330 s 291.699727470969; Mavro mean 2.00185600000000
        // s 0.000429123454003053; Michelso mean 299.852400000000 s 0.0790105478190518;
        // PiDigits mean 4.53480000000000 s 2.86733906028871.
        for name in ["Lew", "Lottery", "Mavro", "Michelso", "PiDigits"] {
            check_strd(name, 14.0, 14.0);
        }
    }

    fn check_quantile(data: &[f64], p: f64, expected: f64) {
        let mut sorted = data.to_vec();
        sorted.sort_unstable_by(f64::total_cmp);
        let got = quantile_type7(&sorted, p).unwrap();
        assert!(
            (got - expected).abs() <= 1e-12 * expected.abs().max(1.0),
            "{data:?} p={p}: got {got}, expected {expected}"
        );
    }

    #[test]
    fn quantiles_type7_reference() {
        // Source: Hyndman & Fan (1996) type 7, values in tests/reference/quantiles.json
        // (numpy 'linear', scipy mquantiles (1,1) and exact fractions agree); checked
        // against the exact `type7_exact` fractions.
        let json = reference("quantiles.json");
        let cases = json["cases"].as_array().unwrap();
        assert_eq!(cases.len(), 7);
        for case in cases {
            let data = f64s(&case["data"]);
            for q in case["quantiles"].as_array().unwrap() {
                let p = q["p"].as_f64().unwrap();
                check_quantile(&data, p, exact_fraction(&q["type7_exact"]));
            }
            let mut sorted = data.clone();
            sorted.sort_unstable_by(f64::total_cmp);
            let quartiles = Quartiles::from_sorted(&sorted).unwrap();
            assert_eq!(quartiles.median, case["median"].as_f64().unwrap());
            assert_eq!(quartiles.iqr(), exact_fraction(&case["iqr_type7_exact"]));
        }
    }

    #[test]
    fn quantile_of_nothing() {
        assert_eq!(quantile_type7(&[], 0.5), None);
        assert_eq!(Quartiles::from_sorted(&[]), None);
    }

    #[test]
    fn tukey_fences_reference() {
        // Source: Tukey (1977) fences in the quartile form of the NIST/SEMATECH e-Handbook
        // §7.1.6, on type-7 quartiles: tests/reference/outliers.json, box_plot_fences,
        // `type7` block (numpy, scipy.stats.iqr and exact fractions agree). Not the hinges.
        let json = reference("outliers.json");
        let cases = json["box_plot_fences"]["cases"].as_array().unwrap();
        assert_eq!(cases.len(), 3);
        for case in cases {
            let data = f64s(&case["data"]);
            let t7 = &case["type7"];
            let mut sorted = data.clone();
            sorted.sort_unstable_by(f64::total_cmp);
            let q = Quartiles::from_sorted(&sorted).unwrap();
            let f = Fences::tukey(&q);
            let close = |got: f64, key: &str| {
                let want = exact_fraction(&t7[key]);
                assert!((got - want).abs() <= 1e-9, "{key}: got {got}, want {want}");
            };
            close(q.q1, "q1_exact");
            close(q.q3, "q3_exact");
            close(q.iqr(), "iqr_exact");
            close(f.lower_inner, "lower_inner_fence_exact");
            close(f.upper_inner, "upper_inner_fence_exact");
            close(f.lower_outer, "lower_outer_fence_exact");
            close(f.upper_outer, "upper_outer_fence_exact");
            let pick = |kind: Outside| -> Vec<f64> {
                let mut v: Vec<f64> = data
                    .iter()
                    .copied()
                    .filter(|&x| f.classify(x) == kind)
                    .collect();
                v.sort_unstable_by(f64::total_cmp);
                v
            };
            let mut mild = f64s(&t7["mild_outliers"]);
            let mut extreme = f64s(&t7["extreme_outliers"]);
            mild.sort_unstable_by(f64::total_cmp);
            extreme.sort_unstable_by(f64::total_cmp);
            assert_eq!(pick(Outside::Mild), mild, "{}", case["name"]);
            assert_eq!(pick(Outside::Extreme), extreme, "{}", case["name"]);
        }
    }

    #[test]
    fn modified_z_reference() {
        // Source: Iglewicz & Hoaglin (1993), M = 0.6745 (x − median) / MAD, flag |M| > 3.5;
        // tests/reference/outliers.json, modified_z_score cases (numpy, scipy and exact
        // fractions). Compared with the exact fractions to 1e-9: float MAD carries roundoff
        // (0.09999999999999987 for an exact 1/10 in M1).
        let json = reference("outliers.json");
        let cases = json["modified_z_score"]["cases"].as_array().unwrap();
        assert_eq!(cases.len(), 4);
        for case in cases {
            let name = case["name"].as_str().unwrap();
            let data = f64s(&case["data"]);
            let mut sorted = data.clone();
            sorted.sort_unstable_by(f64::total_cmp);
            let median = median_sorted(&sorted).unwrap();
            assert_eq!(median, exact_fraction(&case["median_exact"]), "{name}");
            let m = mad(&sorted, median).unwrap();
            assert!(
                (m - exact_fraction(&case["mad_exact"])).abs() < 1e-12,
                "{name}"
            );
            let z = modified_z_scores(&data);
            if case["modified_z"].is_null() {
                // M4_mad_zero: MAD = 0, M undefined. Project decision: no scores, no flags.
                assert_eq!(z, None, "{name}");
                continue;
            }
            let z = z.unwrap();
            for (got, want) in z.iter().zip(case["modified_z_exact"].as_array().unwrap()) {
                let want = exact_fraction(want);
                assert!((got - want).abs() < 1e-9, "{name}: got {got}, want {want}");
            }
            let mut flagged: Vec<f64> = data
                .iter()
                .zip(&z)
                .filter(|(_, m)| m.abs() > MODIFIED_Z_THRESHOLD)
                .map(|(x, _)| *x)
                .collect();
            let mut want = f64s(&case["flagged_abs_M_gt_3_5"]);
            flagged.sort_unstable_by(f64::total_cmp);
            want.sort_unstable_by(f64::total_cmp);
            assert_eq!(flagged, want, "{name}");
        }
    }

    #[test]
    fn summary_of_mad_zero_still_has_fences() {
        // Data of outliers.json M4_mad_zero: MAD = 0, so no modified z flags, but the Tukey
        // fences (Q1 = 5, Q3 = 5.5, type 7) still catch 100.
        let mut v = vec![5.0, 5.0, 5.0, 5.0, 5.0, 6.0, 100.0];
        let mut m = Moments::default();
        for x in &v {
            m.push(Number {
                value: *x,
                exact: None,
            });
        }
        let s = summarize(&mut v, &m, 10, 2).unwrap();
        assert!(!s.modified_z_defined);
        assert!(s.modified_z_flagged.is_empty());
        assert_eq!(s.beyond_outer, 1);
        assert_eq!(s.outside[0].value, 100.0);
    }

    fn check_sentinels(data: &[f64], expected: &[f64]) {
        let mut sorted = data.to_vec();
        sorted.sort_unstable_by(f64::total_cmp);
        let got: Vec<f64> = suspected_sentinels(&sorted, 2)
            .iter()
            .map(|c| c.value)
            .collect();
        assert_eq!(got, expected, "{data:?}");
    }

    #[test]
    fn sentinels() {
        // Far below non-negative ages.
        check_sentinels(&[-9.0, -9.0, 23.0, 35.0, 41.0, 52.0, 60.0, 33.0], &[-9.0]);
        // Far above a small count.
        check_sentinels(&[999.0, 999.0, 999.0, 1.0, 2.0, 2.0, 3.0, 4.0], &[999.0]);
        // 9 as "don't know" on a 1-5 scale: outside the range by more than half of it.
        check_sentinels(&[9.0, 9.0, 1.0, 2.0, 3.0, 4.0, 5.0, 3.0], &[9.0]);
        // 99 inside a plausible age distribution is not suspected.
        check_sentinels(&[99.0, 99.0, 20.0, 45.0, 60.0, 80.0, 98.0, 97.0], &[]);
        // A single occurrence is not "repeated".
        check_sentinels(&[-999.0, 23.0, 35.0, 41.0, 52.0, 60.0], &[]);
        // Negative codes among negative values are data.
        check_sentinels(&[-9.0, -9.0, -12.0, -3.0, 4.0, -7.0, 0.0], &[]);
        // Too few other values to judge.
        check_sentinels(&[-99.0, -99.0, 3.0, 4.0], &[]);
    }

    fn check_magnitude(data: &[f64], expected: &[(f64, u32)]) {
        let mut sorted = data.to_vec();
        sorted.sort_unstable_by(f64::total_cmp);
        let fences = Fences::tukey(&Quartiles::from_sorted(&sorted).unwrap());
        let got: Vec<(f64, u32)> = magnitude_errors(&sorted, &fences, &[])
            .iter()
            .map(|m| (m.value, m.factor))
            .collect();
        assert_eq!(got, expected, "{data:?}");
    }

    #[test]
    fn magnitudes() {
        let weights = [61.0, 64.5, 70.0, 72.0, 68.0, 75.0, 80.0, 66.0];
        check_magnitude(&[&weights[..], &[7200.0]].concat(), &[(7200.0, 100)]);
        check_magnitude(&[&weights[..], &[655.0]].concat(), &[(655.0, 10)]);
        check_magnitude(&[&weights[..], &[-6800.0]].concat(), &[]);
        // An outlier that no power of ten brings back is not a magnitude error.
        check_magnitude(&[&weights[..], &[150.0]].concat(), &[]);
        check_magnitude(&weights, &[]);
    }

    #[test]
    fn run_lengths_count_ties() {
        let got = run_lengths(&[1.0, 1.0, 2.0, 3.0, 3.0, 3.0]);
        let want = [(1.0, 2), (2.0, 1), (3.0, 3)].map(|(value, count)| ValueCount { value, count });
        assert_eq!(got, want);
    }

    mod properties {
        use super::*;
        use proptest::prelude::*;

        /// Straightforward type 7 via Hyndman & Fan's j/g/m form (1-based, m = 1 − p).
        fn reference_type7(sorted: &[f64], p: f64) -> f64 {
            let n = sorted.len() as f64;
            let npm = n * p + (1.0 - p);
            let j = npm.floor();
            let g = npm - j;
            let x = |k: f64| sorted[(k.clamp(1.0, n) as usize) - 1];
            (1.0 - g) * x(j) + g * x(j + 1.0)
        }

        proptest! {
            #[test]
            fn quantiles_match_sort_reference(
                data in prop::collection::vec(-1e6f64..1e6, 1..200),
                p in 0.0f64..=1.0,
            ) {
                let mut sorted = data.clone();
                sorted.sort_by(|a, b| a.partial_cmp(b).unwrap());
                let scale = sorted.iter().fold(1.0f64, |m, x| m.max(x.abs()));
                let got = quantile_type7(&sorted, p).unwrap();
                let want = reference_type7(&sorted, p);
                prop_assert!((got - want).abs() <= 1e-9 * scale, "p={} got {} want {}", p, got, want);

                let q = Quartiles::from_sorted(&sorted).unwrap();
                prop_assert_eq!(q.min, *data.iter().min_by(|a, b| a.total_cmp(b)).unwrap());
                prop_assert_eq!(q.max, *data.iter().max_by(|a, b| a.total_cmp(b)).unwrap());
                let n = sorted.len();
                let median = if n % 2 == 1 {
                    sorted[n / 2]
                } else {
                    (sorted[n / 2 - 1] + sorted[n / 2]) / 2.0
                };
                prop_assert!((q.median - median).abs() <= 1e-9 * scale);
                prop_assert!(q.min <= q.q1 && q.q1 <= q.median && q.median <= q.q3 && q.q3 <= q.max);
            }

            #[test]
            fn moments_match_two_pass(data in prop::collection::vec(-1e3f64..1e3, 2..100)) {
                let mut m = Moments::default();
                for x in &data {
                    // Through the text form, as cells arrive.
                    m.push(parse_number(&format!("{x}")).unwrap().0);
                }
                let n = data.len() as f64;
                let mean = data.iter().sum::<f64>() / n;
                let var = data.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
                prop_assert!((m.mean().unwrap() - mean).abs() <= 1e-9);
                prop_assert!((m.variance().unwrap() - var).abs() <= 1e-9 * var.max(1.0));
            }
        }
    }
}
