//! Integration tests: each drives the real `emend` binary in a fresh temp folder.

mod util;

mod bad_input;
mod rebuild;
mod roundtrip;
mod tamper;
mod walkthrough;
mod demo;
mod identity;
mod pipes;
mod store;
