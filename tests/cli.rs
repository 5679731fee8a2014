//! The `ringline` command as a user runs it: exit codes, located messages on stderr, and the
//! numbers of `inspect` worked out by hand from small inputs.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::{
    bad_cases, demo_network_scenario, demo_scenario_path, ringline, GOOD_LAYOUT, GOOD_SPIKES,
};
use std::path::{Path, PathBuf};
use std::process::Output;

/// Fails the test with the command's own stderr unless it exited with 0.
fn assert_succeeded(out: &Output) {
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
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
    assert_succeeded(&out);
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

/// `analyze` on the demo strip: the documented JSON keys, the files of --out, and the same
/// numbers in both.
#[test]
fn analyze_json_keys_and_out_files_agree() {
    let demo = concat!(env!("CARGO_MANIFEST_DIR"), "/../demo-data/strip-16");
    let dir = tempfile::tempdir().unwrap();
    let spikes = format!("{demo}/spikes.csv");
    let layout = format!("{demo}/layout.csv");
    let out_dir = dir.path().join("out");
    let out = ringline(
        &[
            "analyze",
            &spikes,
            "--layout",
            &layout,
            "--json",
            "--out",
            out_dir.to_str().unwrap(),
        ],
        dir.path(),
    );
    assert_succeeded(&out);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["track"]["kind"], "line");
    let bursts = v["bursts"].as_array().unwrap();
    assert_eq!(
        v["summary"]["burst_count"].as_u64().unwrap() as usize,
        bursts.len()
    );
    assert!(v["summary"]["median_speed_mm_s"].as_f64().unwrap() > 0.0);
    assert!(v["summary"]["ibi_median_s"].as_f64().unwrap() > 0.0);
    let mut with_front = 0;
    for b in bursts {
        assert!(b["start_s"].as_f64().unwrap() < b["end_s"].as_f64().unwrap());
        if b["front"].is_null() {
            assert!(b["no_front_reason"].is_string());
            assert!(b["no_front_kind"].is_string());
            continue;
        }
        for a in b["activations"].as_array().unwrap() {
            let status = a["status"].as_str().unwrap();
            assert_eq!(
                a["used"].as_bool().unwrap(),
                status == "used" || status == "retimed",
                "{a}"
            );
        }
        with_front += 1;
        let f = &b["front"];
        let speed = f["speed_mm_s"].as_f64().unwrap();
        let ci = f["speed_ci95_mm_s"].as_array().unwrap();
        assert!(
            speed > 0.0 && ci[0].as_f64().unwrap() <= speed && speed <= ci[1].as_f64().unwrap()
        );
        for key in [
            "model",
            "origin_site",
            "direction_xy",
            "rotation",
            "sites_used",
            "r2",
        ] {
            assert!(f.get(key).is_some(), "front lacks {key}");
        }
        if f["model"] == "line_one_way" {
            let d = f["direction_xy"].as_array().unwrap();
            let norm = d[0].as_f64().unwrap().hypot(d[1].as_f64().unwrap());
            assert!((norm - 1.0).abs() < 1e-9);
        }
    }
    let fronts_csv = std::fs::read_to_string(out_dir.join("fronts.csv")).unwrap();
    assert_eq!(fronts_csv.lines().count() - 1, with_front);
    let bursts_csv = std::fs::read_to_string(out_dir.join("bursts.csv")).unwrap();
    assert_eq!(bursts_csv.lines().count() - 1, bursts.len());
    let activation = std::fs::read_to_string(out_dir.join("activation.csv")).unwrap();
    assert!(
        activation.starts_with("burst,site,along_um,x_um,y_um,time_s,first_spike_s,used,status\n")
    );
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("summary.json")).unwrap())
            .unwrap();
    assert_eq!(summary["summary"], v["summary"]);
    // The first front's speed, written in fronts.csv, is the JSON's number to the last bit.
    let first = fronts_csv
        .lines()
        .nth(1)
        .unwrap()
        .split(',')
        .nth(2)
        .unwrap()
        .parse::<f64>()
        .unwrap();
    let json_first = bursts.iter().find(|b| !b["front"].is_null()).unwrap()["front"]["speed_mm_s"]
        .as_f64()
        .unwrap();
    assert_eq!(first, json_first);
}

#[test]
fn analyze_bad_settings_exit_2_and_flat_traces_have_no_events() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "lay.csv", GOOD_LAYOUT);
    write(dir.path(), "act.csv", GOOD_SPIKES);
    write(
        dir.path(),
        "settings.json",
        b"{\n  \"fronts\": { \"resamples\": \"many\" }\n}\n",
    );
    let out = ringline(
        &[
            "analyze",
            "act.csv",
            "--layout",
            "lay.csv",
            "--settings",
            "settings.json",
        ],
        dir.path(),
    );
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(stderr.contains("settings.json, line 2"), "{stderr}");
    let out = ringline(
        &[
            "analyze",
            "act.csv",
            "--layout",
            "lay.csv",
            "--resamples",
            "10",
        ],
        dir.path(),
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr)
        .contains("expected 100 to 100000 bootstrap resamples, found 10"));
    // Traces are analysed through their events; flat traces have none, and the report says so.
    write(dir.path(), "traces.csv", b"time_s,A,B\n0,1,2\n0.1,1,2\n");
    let out = ringline(
        &["analyze", "traces.csv", "--layout", "lay.csv", "--json"],
        dir.path(),
    );
    assert_eq!(out.status.code(), Some(0));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(report["summary"]["burst_count"], 0);
    assert!(report["notices"]
        .to_string()
        .contains("fluorescence: 0 events found in 2 ROIs"));
}

/// `simulate` writes the files of a network scenario, and a shorter duration from the
/// command line gives a truth whose bursts all lie inside it.
#[test]
fn simulate_network_scenario_with_overrides() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = &demo_scenario_path("network-strip-16.json");
    let out = ringline(
        &[
            "simulate",
            scenario,
            "--out",
            "sim",
            "--duration",
            "12",
            "--seed",
            "5",
        ],
        dir.path(),
    );
    assert_succeeded(&out);
    for f in [
        "spikes.csv",
        "layout.csv",
        "traces.csv",
        "roi_layout.csv",
        "truth.json",
    ] {
        assert!(dir.path().join("sim").join(f).exists(), "{f} missing");
    }
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("sim/truth.json")).unwrap())
            .unwrap();
    assert_eq!(truth["scenario"]["seed"], 5);
    for b in truth["bursts"].as_array().unwrap() {
        assert!(b["end_s"].as_f64().unwrap() <= 12.0);
    }
    write(
        dir.path(),
        "bad.json",
        b"{\"model\": \"network\", \"name\": 1}",
    );
    let out = ringline(&["simulate", "bad.json", "--out", "x"], dir.path());
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("bad.json: name: expected a string, found integer `1`"),
        "{stderr}"
    );
    write(
        dir.path(),
        "broken.json",
        b"{\n  \"model\": \"fronts\",\n  oops\n}",
    );
    let out = ringline(&["simulate", "broken.json", "--out", "x"], dir.path());
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr.contains("broken.json: line 3, column 3"), "{stderr}");
}

/// `simulate` without a scenario file builds the culture from options: the electrodes sit
/// where the options say (a square grid over a dish, pitch = side / columns), the scenario it
/// writes runs again to the same files byte for byte, and options it cannot honour are
/// refused with the option's name.
#[test]
fn simulate_from_culture_options() {
    let dir = tempfile::tempdir().unwrap();
    let args = [
        "simulate",
        "--pattern",
        "dish",
        "--length-um",
        "1200",
        "--electrodes",
        "16",
        "--density",
        "1000",
        "--duration",
        "6",
        "--seed",
        "4",
        "--out",
        "dish",
    ];
    let out = ringline(&args, dir.path());
    assert_succeeded(&out);
    let layout = std::fs::read_to_string(dir.path().join("dish/layout.csv")).unwrap();
    let mut xs: Vec<f64> = Vec::new();
    let mut ys: Vec<f64> = Vec::new();
    for line in layout.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let cells: Vec<&str> = line.split(',').collect();
        xs.push(cells[1].parse().unwrap());
        ys.push(cells[2].parse().unwrap());
    }
    assert_eq!(xs.len(), 16);
    // 4 x 4 grid over a 1,200 um square: pitch 300 um, first electrode 150 um in.
    for v in xs.iter().chain(&ys) {
        let k = (v - 150.0) / 300.0;
        assert!(
            (k - k.round()).abs() < 1e-9 && (0.0..=3.0).contains(&k.round()),
            "{v}"
        );
    }
    let again = ringline(
        &["simulate", "dish/scenario.json", "--out", "again"],
        dir.path(),
    );
    assert_succeeded(&again);
    for f in ["spikes.csv", "layout.csv", "truth.json"] {
        assert_eq!(
            std::fs::read(dir.path().join("dish").join(f)).unwrap(),
            std::fs::read(dir.path().join("again").join(f)).unwrap(),
            "{f} differs"
        );
    }
    let out = ringline(
        &[
            "simulate",
            "--pattern",
            "disk",
            "--electrodes",
            "10",
            "--out",
            "x",
        ],
        dir.path(),
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&out.stderr).contains("--electrodes: a dish takes a square grid")
    );
    let out = ringline(&["simulate", "--width-um=-5", "--out", "x"], dir.path());
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr)
        .contains("--width-um: expected a number above 0, found -5"));
    let out = ringline(
        &[
            "simulate",
            "dish/scenario.json",
            "--pattern",
            "ring",
            "--out",
            "x",
        ],
        dir.path(),
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not both"));
}

/// `simulate --in-degree-sweep`: the CSV is the core's sweep of the same culture byte for
/// byte, the figure is an SVG with its axis units, and a kinematic scenario is refused.
#[test]
fn simulate_in_degree_sweep() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = &demo_scenario_path("network-strip-16.json");
    let out = ringline(
        &[
            "simulate",
            scenario,
            "--in-degree-sweep",
            "0.5,2,8",
            "--out",
            "sweep",
        ],
        dir.path(),
    );
    assert_succeeded(&out);
    let network = demo_network_scenario("network-strip-16.json");
    let points =
        ringline::simulate::network::in_degree_sweep(&network, &[0.5, 2.0, 8.0], &mut |_, _| {})
            .unwrap();
    assert_eq!(
        std::fs::read_to_string(dir.path().join("sweep/connectivity.csv")).unwrap(),
        ringline::simulate::network::in_degree_sweep_csv(&points)
    );
    let svg = std::fs::read_to_string(dir.path().join("sweep/connectivity.svg")).unwrap();
    assert!(svg.contains("target mean in-degree K (inputs per neuron)"));
    assert!(svg.contains("giant component (fraction of neurons)"));
    let table = String::from_utf8_lossy(&out.stdout);
    assert_eq!(table.lines().count(), 4, "{table}");

    let kinematic = &demo_scenario_path("strip-16.json");
    let refused = ringline(
        &[
            "simulate",
            kinematic,
            "--in-degree-sweep",
            "1",
            "--out",
            "no",
        ],
        dir.path(),
    );
    assert_eq!(refused.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&refused.stderr).contains("needs a spiking network scenario"));
}
