//! Field stimulation of simulated cultures, analysed as a lab would analyse it, against the
//! simulator's ground truth (truth.json: every neuron's threshold, and what each stimulus
//! did).
//!
//! - Synapses fully blocked (`excitatory_scale` 0): each ROI is one neuron, so the
//!   population curve over ROIs is the distribution of the neurons' thresholds. Its 50%
//!   point and width must hold the simulated N(1.0 V, 0.2 V) within the spread of 100
//!   drawn thresholds, and each ROI's own fit or bound must reach the gap between the
//!   tested amplitudes that holds its threshold.
//! - The electrodes (about one neuron each) must respond at the rate their neurons'
//!   thresholds say: a site with a neuron at or under the amplitude responds.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

const AMPLITUDES: [f64; 8] = [0.6, 0.75, 0.85, 0.95, 1.05, 1.15, 1.25, 1.4];

fn scenario(scale: f64, seed: u64) -> String {
    format!(
        r#"{{"model": "network", "name": "stimulated", "seed": {seed}, "duration_s": 125,
  "pattern": {{"shape": "strip", "length_um": 3000, "width_um": 300}},
  "density_per_mm2": 1500,
  "connectivity": {{"footprint": "gaussian", "sigma_um": 150, "mean_in_degree": 100}},
  "neuron": {{"tau_m_s": 0.02, "threshold_mv": 20, "reset_mv": 10, "refractory_s": 0.002}},
  "drive": {{"mean_mv": 14, "sd_mv": 1.5}},
  "noise": {{"rate_hz": 20, "amplitude_mv": 1.0}},
  "synapse": {{"excitatory_mv": 4.0, "inhibitory_mv": 2.0, "depression_u": 0.5, "recovery_s": 3.0}},
  "electrodes": {{"layout": {{"shape": "row", "count": 16, "pitch_um": 187.5}}, "offset_um": [93.75, 0], "pickup_radius_um": 15, "detection_probability": 1.0, "sampling_rate_hz": 25000}},
  "imaging": {{"rois": 100, "frame_rate_hz": 100, "decay_s": 0.3, "amplitude": 0.3, "noise_sd": 0.02}},
  "excitatory_scale": {scale},
  "stimulation": {{"threshold_mean": 1.0, "threshold_sd": 0.2, "amplitudes": {AMPLITUDES:?}, "repeats": 12, "start_s": 25, "interval_s": 1.0}}}}"#
    )
}

use common::{csv_number as num, csv_rows as table};

/// Simulates and analyses one culture; returns the folder.
fn run(dir: &std::path::Path, scale: f64, seed: u64) {
    std::fs::write(dir.join("scenario.json"), scenario(scale, seed)).unwrap();
    let ok = |out: std::process::Output| {
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
    };
    ok(common::ringline(
        &["simulate", "scenario.json", "--out", "sim"],
        dir,
    ));
    for (data, layout, out) in [
        ("sim/traces.csv", "sim/roi_layout.csv", "rois"),
        ("sim/spikes.csv", "sim/layout.csv", "electrodes"),
    ] {
        ok(common::ringline(
            &[
                "analyze",
                data,
                "--layout",
                layout,
                "--stimuli",
                "sim/stimuli.csv",
                "--out",
                out,
            ],
            dir,
        ));
    }
}

#[test]
fn blocked_culture_gives_back_its_threshold_distribution() {
    let dir = tempfile::tempdir().unwrap();
    run(dir.path(), 0.0, 5);
    let truth: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("sim/truth.json")).unwrap())
            .unwrap();
    let stimulation = &truth["stimulation"];
    let roi_thresholds: Vec<f64> = stimulation["roi_thresholds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert_eq!(roi_thresholds.len(), 100);
    let curves = table(&dir.path().join("rois/curves.csv"));
    let population = curves.iter().find(|r| r["curve"] == "population").unwrap();
    assert_eq!(population["fit"], "fitted");
    let (mu, sigma) = (num(population, "threshold_V"), num(population, "width_V"));
    let n = roi_thresholds.len() as f64;
    let drawn_mean = roi_thresholds.iter().sum::<f64>() / n;
    eprintln!(
        "blocked: 50% point {mu:.4} V, width {sigma:.4} V; simulated N(1.0, 0.2), the 100 ROIs' thresholds average {drawn_mean:.4}"
    );
    // 3 standard errors of the mean and of the SD of 100 draws from N(1.0, 0.2).
    assert!((mu - 1.0).abs() < 3.0 * 0.2 / n.sqrt(), "{mu}");
    assert!(
        (sigma - 0.2).abs() < 3.0 * 0.2 / (2.0 * n).sqrt(),
        "{sigma}"
    );
    // Each ROI: its fit or bound reaches the gap that holds its threshold.
    let mut held = 0;
    for (k, &theta) in roi_thresholds.iter().enumerate() {
        let name = format!("r{:03}", k + 1);
        let r = curves
            .iter()
            .find(|r| r["curve"] == name)
            .unwrap_or_else(|| panic!("{name}"));
        let ok = common::curve_holds_threshold(r, theta, &AMPLITUDES);
        held += usize::from(ok);
    }
    eprintln!("{held} of 100 ROIs' thresholds inside their fit or bound");
    assert!(held >= 90, "{held}");
    // Electrodes: the share responding at each amplitude against the share whose lowest
    // neuron threshold the amplitude reaches (an electrode without a neuron never does).
    let sites: Vec<Option<f64>> = stimulation["electrode_thresholds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|t| {
            t.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .reduce(f64::min)
        })
        .collect();
    let electrodes = table(&dir.path().join("electrodes/curves.csv"));
    let mut inside = 0;
    for r in electrodes.iter().filter(|r| r["curve"] == "population") {
        let a = num(r, "amplitude_V");
        let expected =
            sites.iter().filter(|t| t.is_some_and(|t| t <= a)).count() as f64 / sites.len() as f64;
        let (lo, hi) = (num(r, "fraction_ci95_low"), num(r, "fraction_ci95_high"));
        eprintln!(
            "electrodes at {a} V: {:.3} responded (95% CI {lo:.3}-{hi:.3}), truth {expected:.3}",
            num(r, "fraction")
        );
        inside += usize::from(lo - 1e-12 <= expected && expected <= hi + 1e-12);
    }
    assert_eq!(
        inside,
        AMPLITUDES.len(),
        "amplitudes whose interval holds the truth"
    );
}

#[test]
fn a_block_series_follows_the_simulated_ignition_and_giant_component() {
    // The same culture (seed) at four levels of excitatory block, as a study: calcium
    // imaging with the protocol in the manifest's stimuli column, through `ringline batch`
    // and `ringline percolation`.
    let scales = [0.6, 0.4, 0.25, 0.0];
    let dir = tempfile::tempdir().unwrap();
    let mut manifest = String::from("recording,data,layout,stimuli,block\n");
    let mut truths = Vec::new();
    for (k, scale) in scales.iter().enumerate() {
        let name = format!("level{k}");
        let sim = dir.path().join(&name);
        std::fs::create_dir_all(&sim).unwrap();
        std::fs::write(sim.join("scenario.json"), scenario(*scale, 5)).unwrap();
        let out = common::ringline(&["simulate", "scenario.json", "--out", "."], &sim);
        assert_eq!(out.status.code(), Some(0));
        truths.push(
            serde_json::from_str::<serde_json::Value>(
                &std::fs::read_to_string(sim.join("truth.json")).unwrap(),
            )
            .unwrap(),
        );
        // The block level: how much of the excitatory weight is blocked.
        manifest.push_str(&format!(
            "{name},{name}/traces.csv,{name}/roi_layout.csv,{name}/stimuli.csv,{}\n",
            1.0 - scale
        ));
    }
    std::fs::write(dir.path().join("study.csv"), manifest).unwrap();
    for args in [
        vec!["batch", "study.csv", "--out", "study"],
        vec!["percolation", "study", "--by", "block"],
    ] {
        let out = common::ringline(&args, dir.path());
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        eprint!("{}", String::from_utf8_lossy(&out.stdout));
    }
    // The study's recordings.csv carries each level's population threshold, so `compare`
    // can set the levels against each other: blocking raises it (the thresholds below).
    common::ringline_ok(
        &[
            "compare",
            "study",
            "--by",
            "block",
            "--metrics",
            "response_threshold",
            "--out",
            "compared",
        ],
        dir.path(),
    );
    let compared = table(&dir.path().join("compared/comparisons.csv"));
    assert_eq!(compared[0]["metric"], "response_threshold");
    // 0.6 blocked against 0.4: the threshold rises by about 0.2 V (0.958 against 0.743).
    assert!(num(&compared[0], "effect") > 0.1, "{:?}", compared[0]);
    let rows = table(&dir.path().join("study/percolation.csv"));
    assert_eq!(rows.len(), 4);
    assert_eq!(rows[3]["disconnected"], "true");
    for figure in ["percolation.svg", "thresholds.svg", "curves-by-level.svg"] {
        let svg = std::fs::read_to_string(dir.path().join("study").join(figure)).unwrap();
        assert!(svg.contains("block") && svg.contains("</svg>"), "{figure}");
        std::fs::write(std::env::temp_dir().join(format!("ringline-{figure}")), svg).ok();
    }
    let normal = |x: f64| 0.5 * libm::erfc(-x / std::f64::consts::SQRT_2);
    let mut previous_threshold = f64::NEG_INFINITY;
    for (row, truth) in rows.iter().zip(&truths) {
        let v_star = num(row, "network_threshold_V");
        // Truth over every neuron, not only the 100 ROIs: the share fired directly at V*
        // (the simulated thresholds are N(1.0, 0.2)), and the giant component as the
        // neurons fired beyond the direct ones, pooled over the stimuli at or above V*.
        let true_ignition = normal((v_star - 1.0) / 0.2);
        let (mut excess, mut room) = (0.0, 0.0);
        for s in truth["stimulation"]["stimuli"].as_array().unwrap() {
            if s["amplitude"].as_f64().unwrap() >= v_star {
                let direct = s["directly_fired_fraction"].as_f64().unwrap();
                excess += s["fired_fraction"].as_f64().unwrap() - direct;
                room += 1.0 - direct;
            }
        }
        let true_giant = (excess / room).clamp(0.0, 1.0);
        let (ignition, g) = (num(row, "ignition_fraction"), num(row, "giant_component"));
        eprintln!(
            "block {}: network threshold {v_star:.3} V, ignition fraction {ignition:.3} (truth {true_ignition:.3}), giant component {g:.3} (95% CI {}-{}; truth {true_giant:.3}; bond-percolated graph {})",
            row["block"],
            row["giant_component_ci95_low"],
            row["giant_component_ci95_high"],
            truth["block_giant_component_fraction"]
        );
        // f is read off 100 ROIs, a sample of the culture's neurons: allow 2.5 binomial
        // standard errors of a share of 100.
        let sampling = (true_ignition * (1.0 - true_ignition) / 100.0).sqrt();
        assert!(
            (ignition - true_ignition).abs() < 2.5 * sampling + 0.01,
            "ignition {ignition} against {true_ignition}"
        );
        assert!((g - true_giant).abs() < 0.1, "{g} against {true_giant}");
        // Blocking raises the network threshold.
        assert!(v_star > previous_threshold - 0.01);
        previous_threshold = v_star;
    }
}

#[test]
fn isolated_oscillators_fire_at_the_rates_drawn_for_them() {
    use ringline::simulate::network::{isolated_rate_hz, oscillator_drive_mv, simulate_network};
    // The drive is the leaky integrate-and-fire period solved for the drive, so the closed
    // form rate (Gerstner et al. 2014, ch. 1; checked against the simulated neuron in
    // tests/rhythm_round_trip.rs) gives the rate back.
    let mut s = common::slow_oscillator_culture(3000.0, 120.0, 8);
    for rate in [0.1, 0.37, 1.0, 2.0] {
        let d = oscillator_drive_mv(&s.neuron, rate);
        // At 0.1 Hz the drive sits 4e-8 mV above threshold, where a rounding of the drive
        // (4e-15 mV) moves the rate by about 1e-7 of itself.
        let back = isolated_rate_hz(&s.neuron, d);
        assert!((back - rate).abs() < 1e-6 * rate, "{rate}: {back}");
    }
    s.drive.isolated_rates_hz = Some([0.1, 2.0]);
    s.synapse.excitatory_mv = 0.0;
    s.synapse.inhibitory_mv = 0.0;
    s.noise.rate_hz = 0.0;
    let e = s.electrodes.as_mut().unwrap();
    e.pickup_radius_um = 20.0;
    e.detection_probability = 1.0;
    // The default membrane (20 ms) cannot reach 0.1 Hz: refused with the time constant needed.
    let mut fast = s.clone();
    fast.neuron.tau_m_s = 0.02;
    let refused = simulate_network(&fast, &mut |_, _, _| {}).unwrap_err();
    assert!(refused.contains("tau_m_s of at least"), "{refused}");
    let rec = simulate_network(&s, &mut |_, _, _| {}).unwrap();
    let (_, spikes) = rec.electrodes.unwrap();
    let mut single = 0;
    for (site, truth) in spikes.iter().zip(&rec.truth.electrode_neurons) {
        assert!(truth
            .isolated_rates_hz
            .iter()
            .all(|&r| (0.1 - 1e-9..=2.0 + 1e-9).contains(&r)));
        if let [rate] = truth.isolated_rates_hz[..] {
            // A regular train: the rate from its mean interval, against the rate drawn.
            let t = &site.times_s;
            let measured = (t.len() - 1) as f64 / (t[t.len() - 1] - t[0]);
            assert!(
                (measured - rate).abs() < 0.01 * rate,
                "{measured} against {rate}"
            );
            single += 1;
        }
    }
    assert!(single >= 3, "{single} single-neuron electrodes");
}

#[test]
fn the_calcium_level_shifts_every_drive_as_documented() {
    use ringline::simulate::network::{
        isolated_rate_hz, oscillator_drive_mv, simulate_network, CALCIUM_DRIVE_MV,
    };
    // The model choice (README "The network simulator"): calcium 1.5 shifts every drive by
    // 0.5 mV x 0.5 and scales the release probability. With oscillator drives, each
    // electrode neuron's rate alone must be the LIF rate of its drawn drive plus the shift.
    let run = |calcium: f64| {
        let mut s = common::slow_oscillator_culture(2000.0, 10.0, 9);
        s.drive.isolated_rates_hz = Some([0.5, 2.0]);
        s.calcium_scale = calcium;
        let truth = simulate_network(&s, &mut |_, _, _| {}).unwrap().truth;
        (s, truth)
    };
    let (s, base) = run(1.0);
    let (_, raised) = run(1.5);
    assert_eq!(raised.scenario.calcium_scale, 1.5);
    let shift = CALCIUM_DRIVE_MV * 0.5;
    let mut compared = 0;
    for (a, b) in base.electrode_neurons.iter().zip(&raised.electrode_neurons) {
        for (&r0, &r1) in a.isolated_rates_hz.iter().zip(&b.isolated_rates_hz) {
            let expected = isolated_rate_hz(&s.neuron, oscillator_drive_mv(&s.neuron, r0) + shift);
            assert!(
                (r1 - expected).abs() < 1e-9 * expected,
                "{r1} against {expected}"
            );
            assert!(r1 > r0);
            compared += 1;
        }
    }
    assert!(compared >= 10, "{compared}");
}
