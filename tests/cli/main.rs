//! Integration tests: each drives the real `emend` binary in a fresh temp folder.

mod util;

// The same reference loader the unit tests use (`src/testdata.rs`), reading `tests/reference/`.
#[path = "../../src/testdata.rs"]
mod testdata;

mod attacks;
mod attacks_input;
mod attacks_output;
mod audit;
mod bad_input;
mod carry;
mod cores;
mod decisions;
mod demo;
mod faults;
mod findings;
mod history;
mod hostile;
mod identity;
mod keys;
mod pipes;
mod profile;
mod readme;
mod rebuild;
mod report;
mod roundtrip;
mod rules;
mod snapshots;
mod store;
mod tamper;
#[cfg(feature = "team")]
mod team;
mod walkthrough;
mod workbooks;
