#![no_main]
//! The `layout` target: see tests/fuzz_harness.rs.

#[path = "../../tests/fuzz_harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| harness::layout(data));
