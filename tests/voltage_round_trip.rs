//! Raw voltage end to end on the command line: synthetic multichannel voltage with fronts of
//! known speed (spike waveforms placed at t0 + x / v on a row of electrodes, in noise), one
//! dead (flat) and one saturated electrode, written as int16 with a sidecar and as WAV;
//! `ringline analyze` must recover the true speed within 5% and name the bad electrodes.
//! Also the located errors of a truncated file and a mismatched sidecar.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};
use std::path::Path;
use std::process::Command;

const FS: f64 = 20_000.0;
const CHANNELS: usize = 12;
const SPACING_UM: f64 = 250.0;
const SPEED_MM_S: f64 = 50.0;
const SCALE_UV: f64 = 0.5; // µV per int16 unit

/// Interleaved int16 samples: noise of SD 10 µV, and for each burst every electrode fires 3
/// to 5 spikes (trough -90 µV) from t0 + x / v on; channel 4 is dead (all zeros) and
/// channel 9 clips at the int16 limits for 5% of the time.
fn synthetic_voltage(duration_s: f64, seed: u64) -> (Vec<i16>, Vec<f64>) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let frames = (duration_s * FS) as usize;
    let noise = Normal::new(0.0, 10.0 / SCALE_UV).unwrap();
    let mut v: Vec<f64> = (0..frames * CHANNELS)
        .map(|_| noise.sample(&mut rng))
        .collect();
    let waveform = |t: f64| {
        -(-0.5 * (t / 1.5e-4).powi(2)).exp() + 0.35 * (-0.5 * ((t - 5e-4) / 3e-4).powi(2)).exp()
    };
    let mut starts = Vec::new();
    let mut t0 = 1.0;
    while t0 < duration_s - 1.0 {
        starts.push(t0);
        t0 += 2.0 + rng.random::<f64>();
    }
    for &t0 in &starts {
        for c in 0..CHANNELS {
            let arrival = t0 + c as f64 * SPACING_UM / SPEED_MM_S * 1e-3;
            let count = rng.random_range(3..=5);
            let mut t = arrival;
            for _ in 0..count {
                let centre = t * FS;
                for k in (centre as usize).saturating_sub(20)..((centre as usize) + 40).min(frames)
                {
                    v[k * CHANNELS + c] += 90.0 / SCALE_UV * waveform((k as f64 - centre) / FS);
                }
                t += 0.004 + 0.01 * rng.random::<f64>();
            }
        }
    }
    for k in 0..frames {
        v[k * CHANNELS + 3] = 0.0;
        if (k / 2000) % 20 == 0 {
            v[k * CHANNELS + 8] = if k % 2 == 0 { 32767.0 } else { -32768.0 };
        }
    }
    let samples = v
        .iter()
        .map(|x| x.round().clamp(-32768.0, 32767.0) as i16)
        .collect();
    (samples, starts)
}

fn layout(dir: &Path) -> String {
    let mut text = String::from("site,x_um,y_um\n");
    for c in 0..CHANNELS {
        text.push_str(&format!("E{:02},{},0\n", c + 1, c as f64 * SPACING_UM));
    }
    let path = dir.join("layout.csv");
    std::fs::write(&path, text).unwrap();
    path.to_string_lossy().into_owned()
}

fn analyze(recording: &Path, layout: &str, extra: &[&str]) -> serde_json::Value {
    let out = Command::new(env!("CARGO_BIN_EXE_ringline"))
        .args([
            "analyze",
            recording.to_str().unwrap(),
            "--layout",
            layout,
            "--json",
        ])
        .args(extra)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

/// `ringline analyze` on a file it must refuse: exit code 2; returns the message.
fn analyze_refused(recording: &Path, layout: &str) -> String {
    let out = Command::new(env!("CARGO_BIN_EXE_ringline"))
        .args(["analyze", recording.to_str().unwrap(), "--layout", layout])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2));
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn check(report: &serde_json::Value, bursts: usize) {
    let median = report["summary"]["median_speed_mm_s"].as_f64().unwrap();
    let error = (median / SPEED_MM_S - 1.0).abs();
    eprintln!(
        "median speed {median:.2} mm/s against {SPEED_MM_S} ({:.1}% off)",
        error * 100.0
    );
    assert!(error < 0.05);
    assert_eq!(
        report["summary"]["burst_count"].as_u64().unwrap() as usize,
        bursts
    );
    let electrodes = report["electrodes"].as_array().unwrap();
    assert_eq!(electrodes.len(), CHANNELS);
    let status = |c: usize| electrodes[c]["status"].as_str().unwrap().to_string();
    assert_eq!(status(3), "flat");
    assert_eq!(status(8), "saturated");
    for c in (0..CHANNELS).filter(|c| ![3, 8].contains(c)) {
        assert_eq!(status(c), "ok", "channel {}", c + 1);
        // Noise 10 µV in the raw signal; the band keeps a bit under half of white noise's SD
        // at 20 kHz (derived: sqrt(2700 / 10000) = 0.52).
        let noise = electrodes[c]["noise_uv"].as_f64().unwrap();
        assert!(noise > 4.0 && noise < 6.5, "channel {}: {noise} µV", c + 1);
    }
}

#[test]
fn int16_with_sidecar_recovers_the_front_speed() {
    let dir = tempfile::tempdir().unwrap();
    let (samples, starts) = synthetic_voltage(40.0, 3);
    let data = dir.path().join("culture.raw");
    let bytes: Vec<u8> = samples.iter().flat_map(|s| s.to_le_bytes()).collect();
    std::fs::write(&data, &bytes).unwrap();
    std::fs::write(
        dir.path().join("culture.json"),
        format!(
            "{{\"sample_rate_hz\": {FS}, \"channels\": {CHANNELS}, \"sample_type\": \"int16\", \"scale_uv\": {SCALE_UV}}}"
        ),
    )
    .unwrap();
    let layout = layout(dir.path());
    let report = analyze(&data, &layout, &[]);
    check(&report, starts.len());
    assert_eq!(report["files"][0]["kind"], "voltage_sidecar");

    // A truncated file: the sidecar's frame size does not divide it; the message says how much
    // is left over.
    std::fs::write(&data, &bytes[..bytes.len() - 3]).unwrap();
    let message = analyze_refused(&data, &layout);
    assert!(message.contains("culture.raw"), "{message}");
    assert!(
        message.contains(&format!("{} bytes left over", 2 * CHANNELS - 3)),
        "{message}"
    );
}

/// The same recording as a 16-bit PCM WAV file (header by the RIFF/WAVE layout, written here
/// byte by byte) analyses the same way.
#[test]
fn wav_recovers_the_front_speed_and_truncation_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let (samples, starts) = synthetic_voltage(30.0, 4);
    let data: Vec<u8> = samples.iter().flat_map(|s| s.to_le_bytes()).collect();
    let mut wav = Vec::new();
    wav.extend_from_slice(b"RIFF");
    wav.extend_from_slice(&(36 + data.len() as u32).to_le_bytes());
    wav.extend_from_slice(b"WAVEfmt ");
    wav.extend_from_slice(&16u32.to_le_bytes());
    wav.extend_from_slice(&1u16.to_le_bytes()); // PCM
    wav.extend_from_slice(&(CHANNELS as u16).to_le_bytes());
    wav.extend_from_slice(&(FS as u32).to_le_bytes());
    wav.extend_from_slice(&((FS as u32) * 2 * CHANNELS as u32).to_le_bytes());
    wav.extend_from_slice(&((2 * CHANNELS) as u16).to_le_bytes());
    wav.extend_from_slice(&16u16.to_le_bytes());
    wav.extend_from_slice(b"data");
    wav.extend_from_slice(&(data.len() as u32).to_le_bytes());
    wav.extend_from_slice(&data);
    let path = dir.path().join("culture.wav");
    std::fs::write(&path, &wav).unwrap();
    let layout = layout(dir.path());
    let report = analyze(&path, &layout, &["--uv-per-unit", &SCALE_UV.to_string()]);
    check(&report, starts.len());
    assert_eq!(report["files"][0]["kind"], "voltage_wav");

    std::fs::write(&path, &wav[..wav.len() / 2]).unwrap();
    let message = analyze_refused(&path, &layout);
    assert!(
        message.contains("culture.wav") && message.contains("truncated"),
        "{message}"
    );
}

/// The network simulator writes raw voltage for its electrodes (noise 10 µV, spike troughs
/// 60 µV: a peak SNR of 6 before filtering); `ringline analyze` on that voltage recovers the
/// median front speed of the simulator's truth (from all neurons' first spikes) within 5%.
#[test]
fn simulated_voltage_round_trip_recovers_the_true_speed() {
    let dir = tempfile::tempdir().unwrap();
    let scenario_path = &common::demo_scenario_path("network-strip-16.json");
    let mut scenario: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(scenario_path).unwrap()).unwrap();
    scenario["duration_s"] = serde_json::json!(40);
    scenario["imaging"] = serde_json::Value::Null;
    scenario["electrodes"]["voltage"] = serde_json::json!({"noise_uv": 10.0, "spike_uv": 60.0});
    let path = dir.path().join("scenario.json");
    std::fs::write(&path, scenario.to_string()).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_ringline"))
        .args([
            "simulate",
            path.to_str().unwrap(),
            "--out",
            dir.path().to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let layout = dir.path().join("layout.csv");
    let report = analyze(
        &dir.path().join("voltage.raw"),
        layout.to_str().unwrap(),
        &[],
    );
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("truth.json")).unwrap())
            .unwrap();
    let mut speeds: Vec<f64> = truth["bursts"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|b| b["speed_mm_s"].as_f64())
        .collect();
    speeds.sort_by(f64::total_cmp);
    let truth_median = speeds[speeds.len() / 2];
    let median = report["summary"]["median_speed_mm_s"].as_f64().unwrap();
    eprintln!(
        "voltage: median {median:.1} mm/s against the truth's {truth_median:.1} ({} true fronts, {} fitted)",
        speeds.len(),
        report["summary"]["front_count"]
    );
    assert!((median / truth_median - 1.0).abs() < 0.05);
    assert!(report["summary"]["front_count"].as_u64().unwrap() >= 8);
}

/// The evidence view on raw voltage: the band-passed voltage around a site's detected spikes.
/// The spikes were placed with a known waveform (trough -90 µV), so the mean snippet must be
/// that waveform through the same band-pass (the filter is checked against scipy's sosfiltfilt
/// in voltage_reference.rs): its trough at the spike time (within 0.1 ms) and as deep within
/// 15%; every snippet crosses the reported detection threshold at the spike.
#[test]
fn the_evidence_view_shows_the_placed_waveform_at_each_detected_spike() {
    use ringline::detect::filter::{butterworth_bandpass, sosfiltfilt};
    use ringline::report::workbook::{StepSettings, Workbook};
    let (samples, _) = synthetic_voltage(20.0, 8);
    let bytes: Vec<u8> = samples.iter().flat_map(|s| s.to_le_bytes()).collect();
    let sidecar = format!(
        "{{\"sample_rate_hz\": {FS}, \"channels\": {CHANNELS}, \"sample_type\": \"int16\", \"scale_uv\": {SCALE_UV}}}"
    );
    let dir = tempfile::tempdir().unwrap();
    let layout = std::fs::read(layout(dir.path())).unwrap();
    let mut read = |a: u64, b: u64| Ok(bytes[a as usize..b as usize].to_vec());
    let wb = Workbook::analyze_file(
        ringline::ActivityFile {
            name: "culture.raw",
            len: bytes.len() as u64,
            head: &bytes[..65536],
            read: &mut read,
            sidecar: Some(("culture.json", sidecar.as_bytes())),
            wav_uv_per_unit: 1.0,
        },
        ("layout.csv", &layout),
        None,
        StepSettings::default(),
        &mut |_, _, _| {},
    )
    .unwrap();
    let header = wb.voltage_header().unwrap().clone();
    let report = wb.report().unwrap();
    let row = report.electrodes.as_ref().unwrap()[1].clone(); // E02
    let [from, to] = wb.window_s();
    let spikes: Vec<f64> = report
        .bursts
        .iter()
        .flat_map(|b| b.activations.iter())
        .filter(|a| a.site == "E02" && a.first_spike_s >= from && a.first_spike_s <= to)
        .map(|a| a.first_spike_s)
        .collect();
    assert!(spikes.len() >= 5);
    let mut bytes_at = |a: u64, b: u64| Ok(bytes[a as usize..b as usize].to_vec());
    let mut frames = ringline::import::frame_reader(&header, &mut bytes_at);
    let settings = ringline::detect::voltage::VoltageSettings::default();
    let snippets = ringline::detect::voltage::spike_snippets(
        &header,
        1,
        &spikes,
        &settings,
        [1.0, 2.0],
        &mut frames,
    )
    .unwrap();
    assert_eq!(snippets.traces_uv.len(), spikes.len());
    let zero = snippets
        .offsets_ms
        .iter()
        .position(|t| t.abs() < 1e-9)
        .unwrap();
    let threshold = -settings.threshold_sd * row.noise_uv;
    for s in &snippets.traces_uv {
        let near = s[zero - 2..=zero + 2]
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min);
        assert!(
            near < threshold,
            "a detected spike that does not cross {threshold} µV"
        );
    }
    // The placed waveform through the same band-pass.
    let waveform = |t: f64| {
        -(-0.5 * (t / 1.5e-4).powi(2)).exp() + 0.35 * (-0.5 * ((t - 5e-4) / 3e-4).powi(2)).exp()
    };
    let template: Vec<f64> = (-400..400)
        .map(|k| 90.0 * waveform(k as f64 / FS))
        .collect();
    let sos = butterworth_bandpass(3, 300.0, 3000.0, FS).unwrap();
    let filtered = sosfiltfilt(&sos, &template).unwrap();
    let expected_trough = filtered.iter().copied().fold(f64::INFINITY, f64::min);
    let n = snippets.traces_uv.len() as f64;
    let mean: Vec<f64> = (0..snippets.offsets_ms.len())
        .map(|k| snippets.traces_uv.iter().map(|s| s[k]).sum::<f64>() / n)
        .collect();
    let (at, trough) = mean
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map(|(k, v)| (snippets.offsets_ms[k], *v))
        .unwrap();
    eprintln!(
        "mean trough {trough:.1} µV at {at:.3} ms; the filtered waveform's {expected_trough:.1} µV"
    );
    assert!(at.abs() <= 0.1);
    assert!((trough / expected_trough - 1.0).abs() < 0.15);
    // The workbook draws it, with the threshold named.
    let mut bytes_at = |a: u64, b: u64| Ok(bytes[a as usize..b as usize].to_vec());
    let mut frames = ringline::import::frame_reader(&header, &mut bytes_at);
    let figure = wb
        .evidence(
            "E02",
            Some(&mut frames),
            ringline::report::figures::Size::default(),
        )
        .unwrap();
    assert!(figure.svg.contains("detection threshold"));
    assert!(wb
        .evidence("E02", None, ringline::report::figures::Size::default())
        .is_err());
}
