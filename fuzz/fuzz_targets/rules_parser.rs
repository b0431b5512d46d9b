//! Fuzz the rules-file parser and checker: any text either parses or gives an error naming a
//! line, never a panic; a parsed file checks a small table without panicking.
#![no_main]

use emend::checks::{Checker, RuleSet};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    match RuleSet::parse(text) {
        Err(e) => assert!(e.line >= 1 || text.is_empty(), "errors name a line: {e}"),
        Ok(rules) => {
            let header: Vec<String> = ["id", "site", "ph", "sampled_on", "score"]
                .iter()
                .map(|s| s.to_string())
                .collect();
            if let Ok(mut checker) = Checker::new(&rules, &header) {
                let rows: [[Option<&str>; 5]; 4] = [
                    [
                        Some("A"),
                        Some("Mill Creek"),
                        Some("7.1"),
                        Some("2025-01-02"),
                        None,
                    ],
                    [
                        Some("B"),
                        Some(""),
                        Some("-9"),
                        Some("2025-02-30"),
                        Some("x"),
                    ],
                    [
                        Some("A"),
                        None,
                        Some("1e400"),
                        Some("not a date"),
                        Some("5"),
                    ],
                    [
                        Some(""),
                        Some("mill creek"),
                        Some("NaN"),
                        Some("2025-12-31"),
                        Some(""),
                    ],
                ];
                for (i, r) in rows.iter().enumerate() {
                    checker.push_row(i as u64 + 1, &format!("r{i}"), r);
                }
                let _ = checker.finish();
            }
        }
    }
});
