//! The `ringline` command as a user runs it: exit codes, located messages on stderr, and the
//! numbers of `inspect` worked out by hand from small inputs.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::{bad_cases, GOOD_LAYOUT, GOOD_SPIKES};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn ringline(args: &[&str], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_ringline"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the binary runs")
}

fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, bytes).expect("temp file");
    path
}

#[test]
fn every_bad_input_exits_2_with_a_located_message() {
    let dir = tempfile::tempdir().unwrap();
    for case in bad_cases() {
        write(dir.path(), "act.csv", case.activity);
        write(dir.path(), "lay.csv", case.layout);
        let mut args = vec!["inspect", "act.csv", "--layout", "lay.csv"];
        args.extend_from_slice(case.args);
        let out = ringline(&args, dir.path());
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{}: {stderr}", case.name);
        assert!(out.stdout.is_empty(), "{}: printed to stdout", case.name);
        let file = if case.file == "activity" {
            "act.csv"
        } else {
            "lay.csv"
        };
        assert!(stderr.contains(file), "{}: {stderr}", case.name);
        if let Some(line) = case.line {
            assert!(
                stderr.contains(&format!("line {line}")),
                "{}: {stderr}",
                case.name
            );
        }
        if let Some(column) = case.column {
            assert!(
                stderr.contains(&format!("column {column}")),
                "{}: {stderr}",
                case.name
            );
        }
        assert!(stderr.contains(case.words), "{}: {stderr}", case.name);
    }
}

#[test]
fn missing_file_and_bad_arguments_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "lay.csv", GOOD_LAYOUT);
    write(dir.path(), "act.csv", GOOD_SPIKES);
    let cases: &[(&[&str], &str)] = &[
        (
            &["inspect", "nothing.csv", "--layout", "lay.csv"],
            "nothing.csv: no such file",
        ),
        (&["inspect", "act.csv"], "--layout"),
        (
            &[
                "inspect", "act.csv", "--layout", "lay.csv", "--track", "hexagon",
            ],
            "hexagon",
        ),
        (
            &[
                "inspect",
                "act.csv",
                "--layout",
                "lay.csv",
                "--track",
                "ring",
                "--ring-centre",
                "1;2",
            ],
            "--ring-centre",
        ),
        (
            &[
                "inspect",
                "act.csv",
                "--layout",
                "lay.csv",
                "--ring-radius",
                "100",
            ],
            "needs a centre",
        ),
        (
            &[
                "inspect", "act.csv", "--layout", "lay.csv", "--track", "polyline",
            ],
            "two waypoints",
        ),
        (
            &[
                "inspect",
                "act.csv",
                "--layout",
                "lay.csv",
                "--start-site",
                "Z",
            ],
            "site 'Z'",
        ),
        (
            &[
                "inspect",
                "act.csv",
                "--layout",
                "lay.csv",
                "--max-mib",
                "0",
            ],
            "more than the limit",
        ),
        (&["inspect", ".", "--layout", "lay.csv"], "folder"),
    ];
    for (args, words) in cases {
        let out = ringline(args, dir.path());
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(stderr.contains(words), "{args:?}: {stderr}");
    }
}

#[test]
fn inspect_json_reports_counts_rates_and_the_track() {
    let dir = tempfile::tempdir().unwrap();
    // Four sites on a line 200 um apart; D is silent. Spikes span 0.5 s to 2.5 s.
    write(dir.path(), "lay.csv", GOOD_LAYOUT);
    write(
        dir.path(),
        "act.csv",
        b"site,time_s,amp\nA,0.5,1\nA,1.5,1\nB,2.5,1\nC,1.0,1\n",
    );
    let out = ringline(
        &["inspect", "act.csv", "--layout", "lay.csv", "--json"],
        dir.path(),
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("one JSON document");
    assert_eq!(v["site_count"], 4);
    assert_eq!(v["spike_count"], 4);
    assert_eq!(v["silent_sites"], serde_json::json!(["D"]));
    assert_eq!(v["duration_s"], 2.0);
    // Rates over the 2 s span: A 2 spikes -> 1 Hz, B and C 0.5 Hz; the median of the active sites 0.5 Hz.
    assert_eq!(v["sites"][0]["rate_hz"], 1.0);
    assert_eq!(v["sites"][1]["rate_hz"], 0.5);
    assert_eq!(v["median_rate_hz"], 0.5);
    assert_eq!(v["track"]["kind"], "line");
    assert_eq!(v["track"]["length_um"], 600.0);
    assert_eq!(v["track"]["site_spacing_um"], 200.0);
    assert_eq!(v["sites"][3]["along_um"], 600.0);
    assert!(v["notices"]
        .as_array()
        .unwrap()
        .iter()
        .any(|n| n["message"].as_str().unwrap().contains("left out")));
}

#[test]
fn inspect_text_carries_units_and_start_site_flips_the_line() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "lay.csv", GOOD_LAYOUT);
    write(dir.path(), "act.csv", GOOD_SPIKES);
    let out = ringline(
        &[
            "inspect",
            "act.csv",
            "--layout",
            "lay.csv",
            "--start-site",
            "D",
        ],
        dir.path(),
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(0));
    for unit in ["um", "Hz", " s "] {
        assert!(text.contains(unit), "no '{unit}' in:\n{text}");
    }
    let out = ringline(
        &[
            "inspect",
            "act.csv",
            "--layout",
            "lay.csv",
            "--json",
            "--start-site",
            "D",
        ],
        dir.path(),
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["sites"][3]["along_um"], 0.0);
    assert_eq!(v["sites"][0]["along_um"], 600.0);
}
