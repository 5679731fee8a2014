#![no_main]
//! The `pipeline` target: see tests/fuzz_harness.rs.

#[path = "../../tests/fuzz_harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| harness::pipeline(data));
