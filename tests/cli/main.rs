//! Integration tests: each drives the real `emend` binary in a fresh temp folder.

mod util;

mod audit;
mod bad_input;
mod carry;
mod demo;
mod faults;
mod hostile;
mod identity;
mod keys;
mod pipes;
mod profile;
mod rebuild;
mod report;
mod roundtrip;
mod rules;
mod store;
mod tamper;
mod walkthrough;
