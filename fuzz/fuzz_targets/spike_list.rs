#![no_main]
//! The `spike_list` target: see tests/fuzz_harness.rs.

#[path = "../../tests/fuzz_harness.rs"]
mod harness;

libfuzzer_sys::fuzz_target!(|data: &[u8]| harness::spike_list(data));
