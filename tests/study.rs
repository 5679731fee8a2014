//! Studies of many recordings: `ringline batch` on a manifest of simulated recordings in four
//! conditions, checked against `ringline analyze` on each recording (byte for byte) and
//! against the simulator's true speeds; failures named with their place while the rest
//! succeed; shards joined by `ringline combine` equal a single run byte for byte.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use common::ringline;
use ringline::import::{read_manifest, ImportLimits, ImportProblem};
use std::path::Path;

/// True front speed of each condition, mm/s (the simulator's input, so the ground truth).
const CONDITION_SPEEDS_MM_S: [f64; 4] = [20.0, 30.0, 40.0, 60.0];
const CULTURES_PER_CONDITION: usize = 5;

/// A WAV header that promises 1,000 bytes of 2-channel int16 data and carries 10.
fn truncated_wav() -> Vec<u8> {
    let mut wav = Vec::new();
    wav.extend_from_slice(b"RIFF");
    wav.extend_from_slice(&(36u32 + 1000).to_le_bytes());
    wav.extend_from_slice(b"WAVEfmt ");
    wav.extend_from_slice(&16u32.to_le_bytes());
    wav.extend_from_slice(&1u16.to_le_bytes());
    wav.extend_from_slice(&2u16.to_le_bytes());
    wav.extend_from_slice(&20_000u32.to_le_bytes());
    wav.extend_from_slice(&80_000u32.to_le_bytes());
    wav.extend_from_slice(&4u16.to_le_bytes());
    wav.extend_from_slice(&16u16.to_le_bytes());
    wav.extend_from_slice(b"data");
    wav.extend_from_slice(&1000u32.to_le_bytes());
    wav.extend_from_slice(&[0u8; 10]);
    wav
}

/// The study: 20 good recordings in 4 conditions, then 3 broken ones. Returns the names of
/// the good recordings.
fn write_study(dir: &Path) -> Vec<String> {
    let mut manifest = String::from("recording,data,layout,culture,speed_condition\n");
    let mut good = Vec::new();
    for (c, &speed) in CONDITION_SPEEDS_MM_S.iter().enumerate() {
        for k in 0..CULTURES_PER_CONDITION {
            let name = format!("c{c}-k{k}");
            common::simulate_strip(dir, &name, speed, 100 + (c * 10 + k) as u64, 90.0, &[5]);
            manifest.push_str(&format!(
                "{name},{name}/spikes.csv,{name}/layout.csv,culture {k},\"{speed} mm/s, sim\"\n"
            ));
            good.push(name);
        }
    }
    std::fs::write(
        dir.join("bad_layout.csv"),
        "site,x_um,y_um\ne01,0,0\ne02,abc,0\n",
    )
    .unwrap();
    std::fs::write(dir.join("short.wav"), truncated_wav()).unwrap();
    manifest.push_str("gone,nowhere/spikes.csv,c0-k0/layout.csv,culture 9,none\n");
    manifest.push_str("badlayout,c0-k0/spikes.csv,bad_layout.csv,culture 9,none\n");
    manifest.push_str("shortwav,short.wav,c0-k0/layout.csv,culture 9,none\n");
    std::fs::write(dir.join("study.csv"), manifest).unwrap();
    good
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn rows(text: &str) -> Vec<csv::StringRecord> {
    csv::Reader::from_reader(text.as_bytes())
        .records()
        .map(Result::unwrap)
        .collect()
}

fn headers(text: &str) -> csv::StringRecord {
    csv::Reader::from_reader(text.as_bytes())
        .headers()
        .unwrap()
        .clone()
}

fn column(text: &str, name: &str) -> usize {
    headers(text).iter().position(|h| h == name).unwrap()
}

#[test]
fn batch_equals_analyze_names_failures_and_shards_combine_to_the_same_bytes() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let good = write_study(d);

    let out = ringline(&["batch", "study.csv", "--out", "all", "--jobs", "2"], d);
    let stderr = String::from_utf8_lossy(&out.stderr).to_string();
    assert_eq!(out.status.code(), Some(3), "some failed: exit 3\n{stderr}");

    // Exactly the three broken recordings failed, each with its located message.
    let status = read(&d.join("all/status.csv"));
    let outcome = column(&status, "outcome");
    let message = column(&status, "message");
    let failed: Vec<(String, String)> = rows(&status)
        .iter()
        .filter(|r| &r[outcome] == "failed")
        .map(|r| (r[0].to_string(), r[message].to_string()))
        .collect();
    assert_eq!(failed.len(), 3, "{failed:?}");
    assert_eq!(failed[0].0, "gone");
    assert!(failed[0].1.contains("nowhere/spikes.csv") && failed[0].1.contains("no such file"));
    assert_eq!(failed[1].0, "badlayout");
    assert!(
        failed[1].1.contains("bad_layout.csv, line 3"),
        "the bad value is on line 3: {}",
        failed[1].1
    );
    assert_eq!(failed[2].0, "shortwav");
    assert!(failed[2].1.contains("short.wav") && failed[2].1.contains("truncated"));
    for name in ["gone", "badlayout", "shortwav"] {
        assert!(stderr.contains(&format!("{name} failed")), "{stderr}");
    }

    // Every good recording's folder holds exactly what `analyze --out` writes for it.
    for name in &good {
        let reference = format!("ref/{name}");
        let out = ringline(
            &[
                "analyze",
                &format!("{name}/spikes.csv"),
                "--layout",
                &format!("{name}/layout.csv"),
                "--out",
                &reference,
            ],
            d,
        );
        assert_eq!(out.status.code(), Some(0));
        let mut files: Vec<String> = std::fs::read_dir(d.join(&reference))
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        files.sort();
        assert_eq!(files.len(), 9, "{files:?}");
        for file in files {
            assert_eq!(
                read(&d.join(&reference).join(&file)),
                read(&d.join("all/recordings").join(name).join(&file)),
                "{name}/{file}"
            );
        }
    }

    // recordings.csv: the summary's own numbers, in manifest order, keyed by the user's columns.
    let recordings = read(&d.join("all/recordings.csv"));
    let speed = column(&recordings, "median_speed_mm_s");
    let bursts = column(&recordings, "burst_count");
    let condition = column(&recordings, "speed_condition");
    let table = rows(&recordings);
    assert_eq!(table.len(), 23);
    for (row, name) in table.iter().zip(&good) {
        assert_eq!(&row[0], name);
        let summary: serde_json::Value = serde_json::from_str(&read(
            &d.join("all/recordings").join(name).join("summary.json"),
        ))
        .unwrap();
        assert_eq!(
            row[speed].parse::<f64>().unwrap(),
            summary["summary"]["median_speed_mm_s"].as_f64().unwrap()
        );
        assert_eq!(
            row[bursts].parse::<u64>().unwrap(),
            summary["summary"]["burst_count"].as_u64().unwrap()
        );
    }
    // Ground truth: each condition's recordings measure its simulated speed (within 10%).
    for (c, truth) in CONDITION_SPEEDS_MM_S.iter().enumerate() {
        let label = format!("{truth} mm/s, sim");
        let measured: Vec<f64> = table
            .iter()
            .filter(|r| r[condition] == label)
            .map(|r| r[speed].parse().unwrap())
            .collect();
        assert_eq!(measured.len(), CULTURES_PER_CONDITION, "condition {c}");
        let mean = measured.iter().sum::<f64>() / measured.len() as f64;
        eprintln!("condition {truth} mm/s: mean of the recordings' median speeds {mean:.2} mm/s");
        assert!(
            (mean / truth - 1.0).abs() < 0.1,
            "condition {truth} mm/s measured {mean:.1} ({measured:?})"
        );
    }

    // The long tables hold every recording's rows, keyed by recording.
    let long = read(&d.join("all/bursts.csv"));
    let total: usize = good
        .iter()
        .map(|n| rows(&read(&d.join("all/recordings").join(n).join("bursts.csv"))).len())
        .sum();
    assert_eq!(rows(&long).len(), total);
    assert_eq!(
        &headers(&long).iter().take(4).collect::<Vec<_>>(),
        &["recording", "culture", "speed_condition", "burst"]
    );

    // Shards joined give the single run's bytes; a missing shard is named.
    for k in 1..=3 {
        let shard = format!("{k}/3");
        let out = ringline(
            &[
                "batch",
                "study.csv",
                "--out",
                &format!("shard{k}"),
                "--shard",
                &shard,
            ],
            d,
        );
        assert!(matches!(out.status.code(), Some(0 | 3)));
        assert!(!d.join(format!("shard{k}/status.csv")).exists());
    }
    let out = ringline(
        &["combine", "shard3", "shard1", "shard2", "--out", "joined"],
        d,
    );
    assert_eq!(out.status.code(), Some(3));
    for table in ["status.csv", "recordings.csv", "bursts.csv", "fronts.csv"] {
        assert_eq!(
            read(&d.join("all").join(table)),
            read(&d.join("joined").join(table)),
            "{table}"
        );
    }
    let out = ringline(&["combine", "shard1", "shard2", "--out", "partial"], d);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("study.csv") && stderr.contains("shard left out"),
        "{stderr}"
    );
}

#[test]
fn manifest_errors_name_their_line_and_column() {
    let read = |text: &str| read_manifest(text.as_bytes(), "m.csv", ImportLimits::default());
    let e = read("recording,data\na,b\n").unwrap_err();
    assert_eq!(e.problem, ImportProblem::MissingColumn);
    assert_eq!(e.to_string().split(": ").next(), Some("m.csv, line 1"));
    let e = read("# study\nrecording,data,layout\na,x.csv,l.csv\na,y.csv,l.csv\n").unwrap_err();
    assert!(e.to_string().starts_with("m.csv, line 4, column 1"), "{e}");
    assert!(e.message.contains("first on line 3"), "{e}");
    let e = read("recording,data,layout\n../up,x.csv,l.csv\n").unwrap_err();
    assert!(e.message.contains("'../up'"), "{e}");
    let e = read("recording,data,layout\na,,l.csv\n").unwrap_err();
    assert!(e.to_string().starts_with("m.csv, line 2, column 2"), "{e}");
    let e = read("recording,data,layout,track\na,x.csv,l.csv,spiral\n").unwrap_err();
    assert!(e.message.contains("'spiral'"), "{e}");
    assert_eq!(
        read("recording,data,layout\n").unwrap_err().problem,
        ImportProblem::NoRows
    );

    let m = read("Recording;Data;Layout;day (DIV);condition\nr1;a.csv;l.csv;14;ttx\n").unwrap();
    assert_eq!(m.columns, ["day (DIV)", "condition"]);
    assert_eq!(m.rows[0].columns, ["14", "ttx"]);
    assert_eq!((m.rows[0].line, m.rows[0].index), (2, 0));
}

#[test]
fn a_row_settings_file_is_laid_over_the_study_settings_and_misspelt_keys_are_refused() {
    let m = read_manifest(
        b"recording,data,layout,track,start_site\nr,a.csv,l.csv,ring,e07\n",
        "m.csv",
        ImportLimits::default(),
    )
    .unwrap();
    let mut study = ringline::RecordingSettings::default();
    study.analysis.fronts.seed = 99;
    let row = &m.rows[0];
    let s = ringline::study::recording_settings(
        &study,
        row,
        Some(("r.json", r#"{"fronts": {"resamples": 500}}"#)),
    )
    .unwrap();
    assert_eq!(s.analysis.fronts.resamples, 500);
    assert_eq!(
        s.analysis.fronts.seed, 99,
        "keys not in the file keep the study's value"
    );
    assert_eq!(s.track.kind, ringline::geometry::TrackChoice::Ring);
    assert_eq!(s.track.start_site.as_deref(), Some("e07"));
    let e = ringline::study::recording_settings(
        &study,
        row,
        Some(("r.json", r#"{"fronts": {"resample": 500}}"#)),
    )
    .unwrap_err();
    assert!(e.to_string().starts_with("r.json, line 1"), "{e}");
    assert!(e.message.contains("fronts.resample"), "{e}");
}

#[test]
fn inputs_are_told_apart_by_one_rule() {
    use ringline::import::{classify_input, sidecar_names, FileKind, InputKind};
    assert_eq!(classify_input("a.wav", &truncated_wav()), InputKind::Wav);
    assert_eq!(
        classify_input("a.csv", b"site,time_s\ne1,0.5\n"),
        InputKind::Table(FileKind::SpikeList)
    );
    assert_eq!(
        classify_input("l.csv", b"site,x_um,y_um\ne1,0,0\n"),
        InputKind::Table(FileKind::Layout)
    );
    assert_eq!(
        classify_input("s.csv", b"recording,data,layout\nr,a,b\n"),
        InputKind::Manifest
    );
    assert_eq!(classify_input("x.raw", b"abc"), InputKind::VoltageSamples);
    assert_eq!(
        classify_input("x", &[0xff, 0xfe, 0x00, 0x80]),
        InputKind::VoltageSamples
    );
    assert_eq!(
        classify_input("x.json", br#"{"sample_rate_hz": 20000}"#),
        InputKind::Sidecar
    );
    assert_eq!(
        classify_input("n.json", br#"{"schema": 1}"#),
        InputKind::Json
    );
    assert_eq!(classify_input("n.txt", b"hello\n"), InputKind::Unknown);
    assert_eq!(sidecar_names("d/rec.raw"), ["d/rec.raw.json", "d/rec.json"]);
    assert_eq!(sidecar_names("d.x/rec"), ["d.x/rec.json"]);
}
