#![no_main]
//! The `manifest` target: see tests/fuzz_harness.rs.

#[path = "../../tests/fuzz_harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| harness::manifest(data));
