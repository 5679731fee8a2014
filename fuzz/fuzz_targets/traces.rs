#![no_main]
//! The `traces` target: see tests/fuzz_harness.rs.

#[path = "../../tests/fuzz_harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| harness::traces(data));
