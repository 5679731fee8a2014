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
/// whole span: a capacity overflow, or an abort asking for petabytes. A few such times are now
/// set aside with a notice naming their line and site, and the rest is analysed as if they
/// were not there (the same bursts and fronts, byte for byte). Many far-out times (more than
/// 16) are not "a few": the span check refuses them, naming the latest site and the limit.
#[test]
fn one_far_out_spike_time_is_set_aside_by_line_and_many_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    demo_copy(dir.path());
    let plain = std::fs::read_to_string(dir.path().join("spikes.csv")).unwrap();
    let lines = plain.lines().count();
    let ok = common::ringline(
        &[
            "analyze",
            "spikes.csv",
            "--layout",
            "layout.csv",
            "--out",
            "plain",
        ],
        dir.path(),
    );
    assert_eq!(ok.status.code(), Some(0));
    for time in ["1e300", "1e15"] {
        let mut text = plain.clone();
        text.push_str(&format!("e05,{time}\n"));
        std::fs::write(dir.path().join("far.csv"), text).unwrap();
        let out = common::ringline(
            &[
                "analyze",
                "far.csv",
                "--layout",
                "layout.csv",
                "--out",
                "far",
            ],
            dir.path(),
        );
        let message = String::from_utf8_lossy(&out.stdout).to_string()
            + &String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(0), "{message}");
        assert!(
            message.contains(&format!("line {}", lines + 1)) && message.contains("e05"),
            "the notice names neither line {} nor e05: {message}",
            lines + 1
        );
        assert!(message.contains("set aside"), "{message}");
        for file in ["bursts.csv", "fronts.csv", "activation.csv"] {
            assert_eq!(
                std::fs::read(dir.path().join("plain").join(file)).unwrap(),
                std::fs::read(dir.path().join("far").join(file)).unwrap(),
                "{file} differs"
            );
        }
        std::fs::remove_dir_all(dir.path().join("far")).unwrap();
    }
    let mut text = plain.clone();
    for k in 0..20 {
        text.push_str(&format!("e05,{}\n", 1e15 + k as f64));
    }
    std::fs::write(dir.path().join("spikes.csv"), text).unwrap();
    refused(
        dir.path(),
        &[],
        &["far-out time", "site 'e05'", "line 5633", "33554432"],
    );
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

/// `1e308` in an `x_mm` column became infinite after the mm-to-µm conversion and panicked in
/// the track fit; 1e300 µm gave speeds of 300 digits. Positions beyond a kilometre are refused
/// at their line, column and site.
#[test]
fn far_out_positions_are_refused_at_their_place() {
    let dir = tempfile::tempdir().unwrap();
    demo_copy(dir.path());
    let layout = std::fs::read_to_string(dir.path().join("layout.csv")).unwrap();
    for (header, far) in [("site,x_mm,y_mm", "1e308"), ("site,x_um,y_um", "1e300")] {
        let mut lines: Vec<String> = layout.lines().map(String::from).collect();
        lines[0] = header.into();
        lines[3] = format!("e03,{far},0");
        std::fs::write(dir.path().join("layout.csv"), lines.join("\n") + "\n").unwrap();
        refused(
            dir.path(),
            &[],
            &["layout.csv", "line 4", "e03", "kilometre"],
        );
    }
}

/// A dead time of 1e300 ms overflowed an integer and looped to 4 GB.
#[test]
fn a_far_out_dead_time_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let samples: Vec<u8> = (0..20_000i16)
        .flat_map(|k| ((k % 50) - 25).to_le_bytes())
        .collect();
    std::fs::write(dir.path().join("v.raw"), samples).unwrap();
    std::fs::write(
        dir.path().join("v.json"),
        r#"{"sample_rate_hz": 20000, "channels": 1, "sample_type": "int16", "scale_uv": 1}"#,
    )
    .unwrap();
    std::fs::write(dir.path().join("layout.csv"), "site,x_um,y_um\na,0,0\n").unwrap();
    let out = common::ringline(
        &[
            "analyze",
            "v.raw",
            "--layout",
            "layout.csv",
            "--dead-time-ms",
            "1e300",
        ],
        dir.path(),
    );
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{message}");
    assert!(
        message.contains("voltage.dead_time_s (--dead-time-ms) from 0 to 1 s"),
        "{message}"
    );
}

/// ROI traces at 1 ps a frame asked for an 80 TB baseline window; it is now capped at the
/// trace's length and the analysis runs to its end.
#[test]
fn a_picosecond_frame_interval_does_not_size_the_baseline_window() {
    let dir = tempfile::tempdir().unwrap();
    let mut traces = String::from("time_s,A,B\n");
    for k in 0..200 {
        traces.push_str(&format!(
            "{:e},{},{}\n",
            k as f64 * 1e-12,
            1.0 + (k % 7) as f64 * 0.01,
            1.0
        ));
    }
    std::fs::write(dir.path().join("traces.csv"), traces).unwrap();
    std::fs::write(
        dir.path().join("rois.csv"),
        "site,x_um,y_um\nA,0,0\nB,100,0\n",
    )
    .unwrap();
    let out = common::ringline(
        &["analyze", "traces.csv", "--layout", "rois.csv"],
        dir.path(),
    );
    assert!(
        matches!(out.status.code(), Some(0) | Some(2)),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// A mono 16-bit PCM WAV of `n` samples at 20 kHz (RIFF header by hand, per the WAVE format
/// of the Microsoft Multimedia Programming Interface 1.0, 1991).
fn wav(n: usize) -> Vec<u8> {
    let data: Vec<u8> = (0..n as i32)
        .flat_map(|k| (((k % 40) - 20) as i16).to_le_bytes())
        .collect();
    let mut out = Vec::new();
    out.extend(b"RIFF");
    out.extend(&(36 + data.len() as u32).to_le_bytes());
    out.extend(b"WAVEfmt ");
    out.extend(&16u32.to_le_bytes());
    out.extend(&1u16.to_le_bytes()); // PCM
    out.extend(&1u16.to_le_bytes()); // one channel
    out.extend(&20_000u32.to_le_bytes());
    out.extend(&40_000u32.to_le_bytes());
    out.extend(&2u16.to_le_bytes());
    out.extend(&16u16.to_le_bytes());
    out.extend(b"data");
    out.extend(&(data.len() as u32).to_le_bytes());
    out.extend(data);
    out
}

/// `--uv-per-unit` 0 or NaN made every electrode flat, and -1 turned the spikes over, all with
/// exit 0; duplicate `channel_sites` in a sidecar silently dropped channels while the report
/// called them usable. Each is refused, naming the option or key.
#[test]
fn voltage_scales_and_channel_sites_that_make_no_sense_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("v.wav"), wav(40_000)).unwrap();
    std::fs::write(
        dir.path().join("layout.csv"),
        "site,x_um,y_um\na,0,0\nb,100,0\n",
    )
    .unwrap();
    for scale in ["0", "NaN", "-1"] {
        let out = common::ringline(
            &[
                "analyze",
                "v.wav",
                "--layout",
                "layout.csv",
                &format!("--uv-per-unit={scale}"),
            ],
            dir.path(),
        );
        let message = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{scale}: {message}");
        assert!(
            message.contains("--uv-per-unit") && message.contains("v.wav"),
            "{message}"
        );
    }
    let samples: Vec<u8> = (0..40_000i32)
        .flat_map(|k| (((k % 40) - 20) as i16).to_le_bytes())
        .collect();
    std::fs::write(dir.path().join("r.raw"), samples).unwrap();
    std::fs::write(
        dir.path().join("r.json"),
        r#"{"sample_rate_hz": 20000, "channels": 2, "sample_type": "int16", "scale_uv": 1, "channel_sites": ["a", "a"]}"#,
    )
    .unwrap();
    let out = common::ringline(&["analyze", "r.raw", "--layout", "layout.csv"], dir.path());
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{message}");
    assert!(
        message.contains("r.json") && message.contains("channels 1 and 2"),
        "{message}"
    );
}

/// `edge_fraction: -1e308` turned 34 bursts into 1 with exit 0.
#[test]
fn an_edge_fraction_outside_its_range_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    demo_copy(dir.path());
    std::fs::write(
        dir.path().join("s.json"),
        r#"{"bursts": {"population_rate": {"edge_fraction": -1e308}}}"#,
    )
    .unwrap();
    refused(
        dir.path(),
        &["--settings", "s.json"],
        &["edge_fraction", "below 1"],
    );
}

/// Two quadratic paths, now linear: the duplicate-header check (100,000 columns took 45 s, a
/// million about 2.5 h) and the nearest-neighbour search over sites (20,000 took 10 s). Both
/// sizes here finish in well under a second now; under the old paths they took minutes.
#[test]
fn wide_headers_and_many_sites_are_read_in_linear_time() {
    let dir = tempfile::tempdir().unwrap();
    let mut header: Vec<String> = (0..200_000).map(|k| format!("c{k}")).collect();
    header[0] = "site".into();
    header[1] = "time_ms".into();
    header.push("C17".into()); // the same name as column 18, in other case
    std::fs::write(dir.path().join("wide.csv"), header.join(",") + "\n").unwrap();
    std::fs::write(dir.path().join("layout.csv"), "site,x_um,y_um\na,0,0\n").unwrap();
    let out = common::ringline(
        &["inspect", "wide.csv", "--layout", "layout.csv"],
        dir.path(),
    );
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{message}");
    assert!(
        message.contains("appears twice (also column 18)"),
        "{message}"
    );

    let mut layout = String::from("site,x_um,y_um\n");
    let mut spikes = String::from("site,time_ms\n");
    for k in 0..50_000 {
        layout.push_str(&format!("s{k},{},{}\n", (k % 250) * 20, (k / 250) * 20));
        if k % 5_000 == 0 {
            spikes.push_str(&format!("s{k},{}\n", k / 100));
        }
    }
    std::fs::write(dir.path().join("grid.csv"), layout).unwrap();
    std::fs::write(dir.path().join("spikes.csv"), spikes).unwrap();
    let out = common::ringline(
        &["inspect", "spikes.csv", "--layout", "grid.csv"],
        dir.path(),
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(text.contains("50000"), "{text}");
}

/// `ringline simulate scenario.json` with one field of the demo's network strip replaced
/// (a JSON pointer and its value) must be refused: exit 2, every word of `expect` in the
/// message, and no output folder.
fn scenario_refused(edits: &[(&str, serde_json::Value)], expect: &[&str]) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data/scenarios");
    let text = std::fs::read_to_string(root.join("network-strip-16.json")).unwrap();
    let mut scenario: serde_json::Value = serde_json::from_str(&text).unwrap();
    for (pointer, value) in edits {
        let (parent, key) = pointer.rsplit_once('/').unwrap();
        let parent = if parent.is_empty() {
            &mut scenario
        } else {
            scenario.pointer_mut(parent).unwrap()
        };
        parent[key] = value.clone();
    }
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("s.json"), scenario.to_string()).unwrap();
    let out = common::ringline(&["simulate", "s.json", "--out", "out"], dir.path());
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{edits:?}: {message}");
    for word in expect {
        assert!(
            message.contains(word),
            "{edits:?}: '{word}' not in: {message}"
        );
    }
    assert!(
        !dir.path().join("out").exists(),
        "something was written to --out"
    );
}

/// The simulator's crashes and endless runs (issue 17): 10^9 electrodes, imaging at 1e300
/// frames/s, voltage at 1e12 samples/s, a footprint of 1e-300 µm, a chain past the neuron
/// cap, a noise rate of 1e12 Hz and a duration of 1e12 s; and values that make no physical
/// sense (a negative in-degree or refractory period, more inputs than other neurons).
#[test]
fn network_scenarios_beyond_a_machine_or_physics_are_refused_by_field() {
    use serde_json::json;
    scenario_refused(
        &[("/electrodes/layout/count", json!(1_000_000_000u64))],
        &["electrodes.layout", "100000 electrodes", "1000000000"],
    );
    scenario_refused(
        &[("/imaging/frame_rate_hz", json!(1e300))],
        &["imaging", "200000000"],
    );
    scenario_refused(
        &[("/electrodes/sampling_rate_hz", json!(1e12))],
        &["electrodes.sampling_rate_hz", "10000000000 Hz"],
    );
    scenario_refused(
        &[
            ("/electrodes/sampling_rate_hz", json!(1e6)),
            (
                "/electrodes/voltage",
                json!({"noise_uv": 5.0, "spike_uv": 80.0}),
            ),
        ],
        &["electrodes.voltage", "1.920e9 samples", "200000000"],
    );
    scenario_refused(
        &[("/connectivity/sigma_um", json!(1e-300))],
        &["connectivity.sigma_um", "at least 1 µm"],
    );
    scenario_refused(
        &[(
            "/pattern",
            json!({"shape": "chain", "length_um": 900000.0, "spacing_um": 0.1}),
        )],
        &["9000001 neurons", "2 million"],
    );
    scenario_refused(
        &[("/noise/rate_hz", json!(1e12))],
        &["noise.rate_hz", "2000000000"],
    );
    scenario_refused(&[("/duration_s", json!(1e12))], &["duration_s", "86400 s"]);
    scenario_refused(
        &[("/connectivity/mean_in_degree", json!(-5.0))],
        &["connectivity.mean_in_degree", "-5"],
    );
    scenario_refused(
        &[("/neuron/refractory_s", json!(-0.001))],
        &["neuron.refractory_s", "-0.001"],
    );
    scenario_refused(
        &[
            ("/pattern/length_um", json!(1000.0)),
            ("/pattern/width_um", json!(400.0)),
            ("/connectivity/mean_in_degree", json!(10_000.0)),
            ("/electrodes/layout/pitch_um", json!(50.0)),
        ],
        &[
            "at most one input from each of the other 599 neurons",
            "10000",
        ],
    );
    scenario_refused(
        &[
            ("/pattern/width_um", json!(-300.0)),
            ("/pattern/length_um", json!(-6000.0)),
        ],
        &["pattern.length_um", "-6000"],
    );
    scenario_refused(
        &[("/synaptic_delay_s", json!(1e-300))],
        &["synaptic_delay_s", "0.00001 s"],
    );
    scenario_refused(
        &[("/axon_speed_mm_s", json!(1e-9))],
        &["axon_speed_mm_s", "faster axon"],
    );
}

/// A kinematic scenario sampled at 1e-300 Hz wrote every spike at 0.00 ms; one running for
/// 1e12 s drew bursts without end.
#[test]
fn kinematic_scenarios_with_a_sampling_rate_or_length_beyond_sense_are_refused() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data/scenarios");
    let text = std::fs::read_to_string(root.join("strip-16.json")).unwrap();
    for (field, value, expect) in [
        ("sampling_rate_hz", 1e-300, "100 Hz to 10000000000 Hz"),
        ("duration_s", 1e12, "bursts"),
    ] {
        let mut scenario: serde_json::Value = serde_json::from_str(&text).unwrap();
        scenario[field] = serde_json::json!(value);
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("s.json"), scenario.to_string()).unwrap();
        let out = common::ringline(&["simulate", "s.json", "--out", "out"], dir.path());
        let message = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{message}");
        assert!(
            message.contains(field) || message.contains(expect),
            "{message}"
        );
        assert!(message.contains(expect), "'{expect}' not in: {message}");
        assert!(!dir.path().join("out").exists());
    }
}

/// A mean in-degree the culture cannot hold within the footprint's reach (800 inputs where a
/// neuron has about 500 neighbours within 4 sigma) used to be realised as a fraction of it with no
/// word. The run goes on, and says so: on stderr and in truth.json, with the realised value.
#[test]
fn an_in_degree_beyond_the_footprint_is_a_notice_with_the_realised_value() {
    let dir = tempfile::tempdir().unwrap();
    let out = common::ringline(
        &[
            "simulate",
            "--pattern",
            "strip",
            "--length-um",
            "2000",
            "--in-degree",
            "800",
            "--duration",
            "0.5",
            "--out",
            "out",
        ],
        dir.path(),
    );
    let message = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{message}");
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("out/truth.json")).unwrap())
            .unwrap();
    let realised = truth["graph"]["mean_in_degree"].as_f64().unwrap();
    assert!(realised < 720.0, "realised {realised}");
    let notice = truth["notices"][0].as_str().unwrap();
    assert!(
        notice.contains(&format!("mean in-degree of {realised:.1}")),
        "{notice}"
    );
    assert!(notice.contains("800 asked for"), "{notice}");
    assert!(
        message.contains(notice),
        "the notice is not on stderr: {message}"
    );
}

/// Sites on a line a few nanometres long gave fronts of "0.0 mm/s (95% CI 0.0 to 0.0)". The
/// speeds now keep two significant digits, and a notice asks for the layout's unit. The
/// speeds scale with the layout: the same spikes on a layout 2^20 times smaller (a power of
/// two, so the scaling itself is exact in binary) give every front's speed 2^20 times smaller
/// (speed is distance over time). The origin search used to stop at an absolute 0.001 µm,
/// which broke this for two-way fronts by up to 14%.
#[test]
fn a_nanometre_layout_gives_speeds_in_its_scale_and_a_notice() {
    let dir = tempfile::tempdir().unwrap();
    demo_copy(dir.path());
    let layout = std::fs::read_to_string(dir.path().join("layout.csv")).unwrap();
    let mut shrunk = String::from("site,x_um,y_um\n");
    for line in layout.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let x: f64 = f[1].parse().unwrap();
        let y: f64 = f[2].parse().unwrap();
        let scale = (-20f64).exp2();
        shrunk.push_str(&format!("{},{:?},{:?}\n", f[0], x * scale, y * scale));
    }
    std::fs::write(dir.path().join("nm.csv"), shrunk).unwrap();
    let run = |layout: &str, out: &str| {
        let o = common::ringline(
            &["analyze", "spikes.csv", "--layout", layout, "--out", out],
            dir.path(),
        );
        assert_eq!(o.status.code(), Some(0));
        let summary: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(dir.path().join(out).join("summary.json")).unwrap(),
        )
        .unwrap();
        (String::from_utf8_lossy(&o.stdout).to_string(), summary)
    };
    let (_, plain) = run("layout.csv", "plain");
    let (text, tiny) = run("nm.csv", "tiny");
    let speed = |s: &serde_json::Value| s["summary"]["median_speed_mm_s"].as_f64().unwrap();
    let ratio = speed(&plain) / speed(&tiny);
    assert!((ratio / 1048576.0 - 1.0).abs() < 1e-9, "ratio {ratio}");
    let fronts = |out: &str| common::csv_rows(&dir.path().join(out).join("fronts.csv"));
    for (a, b) in fronts("plain").iter().zip(fronts("tiny").iter()) {
        let speed = |r: &common::CsvRow| r["speed_mm_s"].parse::<f64>().ok();
        assert_eq!(speed(a).is_some(), speed(b).is_some());
        if let (Some(va), Some(vb)) = (speed(a), speed(b)) {
            assert!(
                (va / vb / 1048576.0 - 1.0).abs() < 1e-9,
                "{va} against {vb}"
            );
        }
    }
    assert!(!text.contains("median 0.0 mm/s"), "{text}");
    assert!(text.contains("check the layout's length unit"), "{text}");
    let shown = format!("median {} mm/s", ringline::report::speed_text(speed(&tiny)));
    assert!(text.contains(&shown), "'{shown}' not in {text}");
}
