//! The one loader for the outside reference values in `tests/reference/` (test-only).
//!
//! The values are copied into the repository with their sources (`tests/reference/README.md`),
//! so a fresh clone passes its tests with nothing beside it. The unit tests use this module as
//! `crate::testdata`; the integration tests include the same file by path, so both read the
//! reference folder the same way. Nothing here is compiled into the library.

#![allow(dead_code)] // Each test binary uses a different part of the loader.

use serde_json::Value;
use std::path::PathBuf;

/// The path of `tests/reference/<name>` in this checkout.
pub fn reference_path(name: &str) -> PathBuf {
    PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference")).join(name)
}

/// The text of `tests/reference/<name>`.
pub fn reference_text(name: &str) -> String {
    let path = reference_path(name);
    std::fs::read_to_string(&path).unwrap_or_else(|err| panic!("reading {}: {err}", path.display()))
}

/// Parses `tests/reference/<name>` as JSON.
pub fn reference(name: &str) -> Value {
    let text = reference_text(name);
    serde_json::from_str(&text).unwrap_or_else(|err| panic!("parsing {name}: {err}"))
}

/// The data lines of a NIST StRD univariate `.dat` file (`file` is relative to the reference
/// folder, as `strd/NumAcc4.dat`): the file has a 60-line header, then one value per line.
pub fn strd_data(file: &str) -> Vec<String> {
    reference_text(file)
        .lines()
        .skip(60)
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .map(str::to_owned)
        .collect()
}

/// A JSON array of numbers as `f64`s.
pub fn f64s(value: &Value) -> Vec<f64> {
    value
        .as_array()
        .expect("a JSON array")
        .iter()
        .map(|v| v.as_f64().expect("a JSON number"))
        .collect()
}

/// An exact value written as `"a/b"`, `"a"` or `"1.5"`, rounded once to `f64`.
pub fn exact_fraction(value: &Value) -> f64 {
    let s = value.as_str().expect("an exact value is a string");
    match s.split_once('/') {
        Some((num, den)) => {
            let num: f64 = num.parse().expect("numerator");
            let den: f64 = den.parse().expect("denominator");
            num / den
        }
        None => s.parse().expect("a number"),
    }
}
