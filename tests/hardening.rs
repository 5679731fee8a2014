//! Regressions of the hardening list (issue 17): inputs that crashed, hung or asked for
//! gigabytes now end with exit code 2, a located message naming the value and the limit, and
//! nothing written to `--out`.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use std::path::Path;

fn demo_copy(dir: &Path) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data/strip-16");
    for f in ["spikes.csv", "layout.csv"] {
        std::fs::copy(root.join(f), dir.join(f)).unwrap();
    }
}

/// `ringline analyze` that must be refused: exit 2, every word of `expect` in the message,
/// and no output folder.
fn refused(dir: &Path, extra: &[&str], expect: &[&str]) {
    let mut args = vec![
        "analyze",
        "spikes.csv",
        "--layout",
        "layout.csv",
        "--out",
        "out",
    ];
    args.extend(extra);
    let out = common::ringline(&args, dir);
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{message}");
    for word in expect {
        assert!(message.contains(word), "'{word}' not in: {message}");
    }
    assert!(
        message.len() < 2_000,
        "a message of {} bytes",
        message.len()
    );
    assert!(!dir.join("out").exists(), "something was written to --out");
}

/// One far-out spike time (1e300 ms, and 1e15 ms) used to be binned into a rate over the
/// whole span: a capacity overflow, or an abort asking for petabytes.
#[test]
fn one_far_out_spike_time_is_named_not_binned() {
    for time in ["1e300", "1e15"] {
        let dir = tempfile::tempdir().unwrap();
        demo_copy(dir.path());
        let mut text = std::fs::read_to_string(dir.path().join("spikes.csv")).unwrap();
        text.push_str(&format!("e05,{time}\n"));
        std::fs::write(dir.path().join("spikes.csv"), text).unwrap();
        refused(dir.path(), &[], &["far-out time", "site e05", "33554432"]);
    }
}

/// Resamples of 1e12 crashed and 1e8 ran on for minutes; a smoothing SD of 1e9 s asked for a
/// kernel of terabytes.
#[test]
fn resamples_and_smoothing_are_bounded() {
    let dir = tempfile::tempdir().unwrap();
    demo_copy(dir.path());
    refused(
        dir.path(),
        &["--resamples", "1000000000000"],
        &["fronts.resamples", "100000"],
    );
    std::fs::write(
        dir.path().join("settings.json"),
        r#"{"bursts": {"population_rate": {"smooth_sd_s": 1e9}}}"#,
    )
    .unwrap();
    refused(
        dir.path(),
        &["--settings", "settings.json"],
        &["smooth_sd_s", "33554432"],
    );
}

/// Misspelt keys (`resample`, `burst`) and a settings file that is a list used to run with
/// the defaults; a value of the wrong kind was worded in Rust's type names. Now each is
/// refused with the file, the key and words a scientist reads.
#[test]
fn settings_files_with_unknown_keys_or_wrong_kinds_are_refused_by_name() {
    let dir = tempfile::tempdir().unwrap();
    demo_copy(dir.path());
    for (text, expect) in [
        (
            r#"{"fronts": {"resample": 200}}"#,
            vec!["s.json", "fronts.resample"],
        ),
        (r#"{"burst": {}}"#, vec!["s.json", "burst"]),
        ("[]", vec!["s.json", "expected a JSON object"]),
        (
            r#"{"fronts": {"resamples": "many"}}"#,
            vec!["s.json", "expected a whole number"],
        ),
    ] {
        std::fs::write(dir.path().join("s.json"), text).unwrap();
        refused(dir.path(), &["--settings", "s.json"], &expect);
        let out = common::ringline(
            &[
                "analyze",
                "spikes.csv",
                "--layout",
                "layout.csv",
                "--settings",
                "s.json",
            ],
            dir.path(),
        );
        assert!(!String::from_utf8_lossy(&out.stderr).contains("usize"));
    }
}
