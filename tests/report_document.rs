//! The self-contained HTML report (`ringline analyze --report`): the run that writes it gives
//! the same files as a plain run, it names every input by its SHA-256 (checked against GNU
//! coreutils' `sha256sum`), lists every setting, draws every figure as an image the file
//! carries itself, holds every burst, runs no script and escapes what the files say.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use base64::Engine as _;
use common::ringline_ok;
use std::path::Path;

/// `sha256sum FILE` from GNU coreutils (FIPS 180-4), the reference for the digests.
fn sha256sum(path: &Path) -> String {
    let out = std::process::Command::new("sha256sum")
        .arg(path)
        .output()
        .expect("sha256sum runs");
    String::from_utf8(out.stdout).unwrap()[..64].to_string()
}

/// Copies the named files of a demo folder into `dir`.
fn copy_demo(folder: &str, files: &[&str], dir: &Path) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../demo-data")
        .join(folder);
    for f in files {
        std::fs::copy(root.join(f), dir.join(f)).unwrap();
    }
}

/// Runs `analyze` twice (plain, and with `--report`) and checks both wrote the same files and
/// printed the same text; returns the report's HTML.
fn report_beside_plain_run(dir: &Path, args: &[&str]) -> String {
    let mut plain = args.to_vec();
    plain.extend(["--out", "plain"]);
    let plain_text = ringline_ok(&plain, dir).stdout;
    let mut with = args.to_vec();
    with.extend(["--out", "with", "--report", "report.html"]);
    let with_text = ringline_ok(&with, dir).stdout;
    assert_eq!(plain_text, with_text, "the printed report differs");
    let mut names: Vec<_> = std::fs::read_dir(dir.join("plain"))
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    names.sort();
    assert!(names.len() >= 9);
    for name in names {
        assert_eq!(
            std::fs::read(dir.join("plain").join(&name)).unwrap(),
            std::fs::read(dir.join("with").join(&name)).unwrap(),
            "{name:?} differs when the report is written"
        );
    }
    std::fs::read_to_string(dir.join("report.html")).unwrap()
}

/// The inputs table's row for `name`: (role, size, digest).
fn input_row(html: &str, name: &str) -> (String, u64, String) {
    let cell = format!("<td>{name}</td>");
    let at = html
        .find(&cell)
        .unwrap_or_else(|| panic!("no input row for {name}"));
    let row_start = html[..at].rfind("<tr>").unwrap();
    let row_end = at + html[at..].find("</tr>").unwrap();
    let cells: Vec<String> = html[row_start..row_end]
        .split("<td")
        .skip(1)
        .map(|c| {
            let text = &c[c.find('>').unwrap() + 1..];
            text[..text.find("</td>").unwrap()].to_string()
        })
        .collect();
    (
        cells[0].clone(),
        cells[2].parse().unwrap(),
        cells[3].clone(),
    )
}

/// What any report must be: no script, the CSP, the caution, figures as SVG data it carries.
fn check_self_contained(html: &str) -> usize {
    assert!(!html.to_lowercase().contains("<script"));
    assert!(html.contains(
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">"
    ));
    assert!(html.contains("not for clinical or diagnostic use"));
    // Nothing that would fetch: no external URL in any src or href.
    for attr in ["src=\"", "href=\""] {
        for piece in html.split(attr).skip(1) {
            assert!(
                piece.starts_with("data:"),
                "a {attr}... that is not data: {}",
                &piece[..40.min(piece.len())]
            );
        }
    }
    let mut figures = 0;
    for piece in html.split("src=\"data:image/svg+xml;base64,").skip(1) {
        let data = &piece[..piece.find('"').unwrap()];
        // RFC 4648 base64, decoded by the `base64` crate's standard engine.
        let svg = base64::engine::general_purpose::STANDARD
            .decode(data)
            .unwrap();
        let svg = String::from_utf8(svg).unwrap();
        assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
        figures += 1;
    }
    figures
}

/// Every leaf key of a JSON document, dotted.
fn leaf_keys(prefix: &str, v: &serde_json::Value, out: &mut Vec<String>) {
    match v {
        serde_json::Value::Object(map) => {
            for (k, v) in map {
                let key = if prefix.is_empty() {
                    k.clone()
                } else {
                    format!("{prefix}.{k}")
                };
                leaf_keys(&key, v, out);
            }
        }
        _ => out.push(prefix.to_string()),
    }
}

#[test]
fn the_demo_report_names_its_inputs_settings_figures_and_every_burst() {
    let dir = tempfile::tempdir().unwrap();
    copy_demo("strip-16", &["spikes.csv", "layout.csv"], dir.path());
    let html = report_beside_plain_run(
        dir.path(),
        &["analyze", "spikes.csv", "--layout", "layout.csv"],
    );
    for name in ["spikes.csv", "layout.csv"] {
        let (_, size, digest) = input_row(&html, name);
        let path = dir.path().join(name);
        assert_eq!(size, std::fs::metadata(&path).unwrap().len());
        assert_eq!(digest, sha256sum(&path));
    }
    // Every figure of the page's steps is drawn (the demo strip has all of them but the
    // response curve, which needs stimuli).
    assert_eq!(check_self_contained(&html), 15);
    // Every setting of the run, by the keys of a settings file.
    let mut keys = Vec::new();
    let mut defaults = serde_json::to_value(ringline::RecordingSettings::default()).unwrap();
    defaults.as_object_mut().unwrap().remove("voltage");
    leaf_keys("", &defaults, &mut keys);
    assert!(keys.len() > 30);
    for key in &keys {
        assert!(
            html.contains(&format!("<tr><td>{key}</td>")),
            "setting {key} is missing"
        );
    }
    // Every burst in the collapsed table, as many as summary.json counts.
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("plain/summary.json")).unwrap(),
    )
    .unwrap();
    let bursts = summary["summary"]["burst_count"].as_u64().unwrap() as usize;
    let start = html.find("<details><summary>Every burst").unwrap();
    let details = &html[start..start + html[start..].find("</details>").unwrap()];
    assert_eq!(details.matches("<tr>").count(), bursts + 1); // with the header row
    assert!(bursts > 10);
}

#[test]
fn site_names_from_the_files_are_text_in_the_report_not_markup() {
    let dir = tempfile::tempdir().unwrap();
    copy_demo("strip-16", &["spikes.csv", "layout.csv"], dir.path());
    // Rename site e01 to a name full of markup in both files.
    let evil = "<img src=x onerror=alert(1)>&";
    for name in ["spikes.csv", "layout.csv"] {
        let text = std::fs::read_to_string(dir.path().join(name)).unwrap();
        let renamed: String = text
            .lines()
            .map(|l| match l.split_once(',') {
                Some(("e01", rest)) => format!("\"{evil}\",{rest}\n"),
                _ => format!("{l}\n"),
            })
            .collect();
        std::fs::write(dir.path().join(name), renamed).unwrap();
    }
    ringline_ok(
        &[
            "analyze",
            "spikes.csv",
            "--layout",
            "layout.csv",
            "--report",
            "r.html",
        ],
        dir.path(),
    );
    let html = std::fs::read_to_string(dir.path().join("r.html")).unwrap();
    assert!(!html.contains(evil));
    assert!(html.contains("&lt;img src=x onerror=alert(1)&gt;&amp;"));
    check_self_contained(&html);
}

#[test]
fn a_voltage_report_names_the_voltage_file_by_its_digest() {
    let dir = tempfile::tempdir().unwrap();
    let mut scenario: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(common::demo_scenario_path("network-strip-16.json")).unwrap(),
    )
    .unwrap();
    scenario["duration_s"] = serde_json::json!(20);
    scenario["imaging"] = serde_json::Value::Null;
    scenario["electrodes"]["voltage"] = serde_json::json!({"noise_uv": 10.0, "spike_uv": 60.0});
    std::fs::write(dir.path().join("scenario.json"), scenario.to_string()).unwrap();
    ringline_ok(&["simulate", "scenario.json", "--out", "."], dir.path());
    let html = report_beside_plain_run(
        dir.path(),
        &["analyze", "voltage.raw", "--layout", "layout.csv"],
    );
    let (role, size, digest) = input_row(&html, "voltage.raw");
    assert_eq!(role, "voltage");
    let raw = dir.path().join("voltage.raw");
    assert_eq!(size, std::fs::metadata(&raw).unwrap().len());
    assert_eq!(digest, sha256sum(&raw));
    assert!(html.contains("Electrodes (spikes detected from voltage)"));
    assert!(html.contains("<tr><td>voltage.band_hz</td>"));
    check_self_contained(&html);
}

#[test]
fn an_imaging_report_draws_the_calcium_events() {
    let dir = tempfile::tempdir().unwrap();
    copy_demo(
        "network-strip-16",
        &["traces.csv", "roi_layout.csv"],
        dir.path(),
    );
    let html = report_beside_plain_run(
        dir.path(),
        &["analyze", "traces.csv", "--layout", "roi_layout.csv"],
    );
    assert!(html.contains("id=\"figure-raster\"><img"));
    let (role, _, digest) = input_row(&html, "traces.csv");
    assert_eq!(role, "activity");
    assert_eq!(digest, sha256sum(&dir.path().join("traces.csv")));
    check_self_contained(&html);
}
