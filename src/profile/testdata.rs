//! Test helpers that read the outside reference values in `shared/reference/`.
//!
//! The path is relative to `CARGO_MANIFEST_DIR`, so it resolves both in a scratch crate and
//! in the main checkout, which sit beside `shared/`. Test-only; nothing here is compiled
//! into the library.

use serde_json::Value;

/// Parses `shared/reference/<name>`.
pub fn reference(name: &str) -> Value {
    let path = format!("{}/../shared/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|err| panic!("reading {path}: {err}"));
    serde_json::from_str(&text).unwrap_or_else(|err| panic!("parsing {path}: {err}"))
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
