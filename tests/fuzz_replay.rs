//! Every committed fuzz input, through the same code the fuzz targets run
//! (`tests/fuzz_harness.rs`): the seeds of each target (`fuzz/seeds/<target>/`) and every
//! input that once crashed, hung or ran out of memory (`fuzz/regressions/<target>/`, kept
//! when the fault was mended). A panic fails the test; `scripts/fuzz` searches further.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

#[path = "fuzz_harness.rs"]
mod harness;

use std::path::Path;

#[test]
fn every_committed_fuzz_input_runs_without_a_panic() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../fuzz");
    let mut seen = 0;
    for (name, target) in harness::TARGETS {
        let mut inputs = 0;
        for kind in ["seeds", "regressions"] {
            let dir = root.join(kind).join(name);
            let Ok(entries) = std::fs::read_dir(&dir) else {
                continue;
            };
            for entry in entries {
                let path = entry.unwrap().path();
                let bytes = std::fs::read(&path).unwrap();
                let outcome = std::panic::catch_unwind(|| target(&bytes));
                assert!(outcome.is_ok(), "{name}: {} panicked", path.display());
                inputs += 1;
            }
        }
        assert!(
            inputs > 0,
            "the {name} target has no seeds under fuzz/seeds/{name}"
        );
        seen += inputs;
    }
    eprintln!("{seen} committed fuzz inputs ran");
}
