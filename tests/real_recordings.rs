//! The analysis on a real recording: 44 single units of human stem-cell-derived neurons on
//! an 8 x 8 electrode grid (Cotterill et al. 2016, J Neurophysiol 116:306; see
//! tests/fixtures/stem-cell-networks-2016/README.md). The units fire sparsely, often in
//! single-site bursts, and rarely together.
//!
//! - Bursts: with every unit's train shifted in time by its own random offset (which keeps
//!   each unit's rate, its single-site bursts and its irregularity, and destroys only the
//!   coincidences between units), no network burst may be found: single-site bursting is not
//!   network bursting.
//! - Fronts: known fronts are added to the real trains (each unit fires 1-3 spikes after the
//!   front reaches its electrode, with a log-normal latency; 5% of units miss each front).
//!   The real firing is then the background, with its stray spikes and bursts, and the added
//!   fronts are the truth: at least 95% of them must be reported, at the right speed (median
//!   error under 3%), with 95% intervals holding the true speed for 90-98%.

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

mod common;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, LogNormal};
use std::fmt::Write;

const DIR: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/../tests/fixtures/stem-cell-networks-2016"
);
const SPAN_S: f64 = 150.0;

/// (unit, time in seconds) rows of a spike list.
type Spikes = Vec<(String, f64)>;
/// (unit, x, y in micrometres) rows of a layout.
type Layout = Vec<(String, f64, f64)>;

/// The fixture's spike list and layout.
fn real() -> (Spikes, Layout) {
    let spikes = std::fs::read_to_string(format!("{DIR}/tc146_d21_first150s.spikes.csv")).unwrap();
    let layout = std::fs::read_to_string(format!("{DIR}/tc146_d21.layout.csv")).unwrap();
    let rows = |text: &str| -> Vec<Vec<String>> {
        text.lines()
            .filter(|l| !l.starts_with('#') && !l.starts_with("site,"))
            .map(|l| l.split(',').map(str::to_string).collect())
            .collect()
    };
    (
        rows(&spikes)
            .into_iter()
            .map(|r| (r[0].clone(), r[1].parse().unwrap()))
            .collect(),
        rows(&layout)
            .into_iter()
            .map(|r| (r[0].clone(), r[1].parse().unwrap(), r[2].parse().unwrap()))
            .collect(),
    )
}

fn spike_csv(spikes: &[(String, f64)]) -> String {
    let mut out = String::from("site,time_s\n");
    for (s, t) in spikes {
        let _ = writeln!(out, "{s},{t:.6}");
    }
    out
}

fn layout_csv(layout: &[(String, f64, f64)]) -> String {
    let mut out = String::from("site,x_um,y_um\n");
    for (s, x, y) in layout {
        let _ = writeln!(out, "{s},{x},{y}");
    }
    out
}

fn run(spikes: &str, layout: &str) -> ringline::fronts::Analysis {
    common::analyse_csv(spikes, layout)
}

#[test]
fn single_site_bursting_is_not_network_bursting() {
    let (spikes, layout) = real();
    let units: Vec<&String> = layout.iter().map(|r| &r.0).collect();
    let mut rng = ChaCha8Rng::seed_from_u64(2016);
    let mut found = Vec::new();
    for _ in 0..10 {
        let offsets: Vec<f64> = units
            .iter()
            .map(|_| rng.random_range(0.0..SPAN_S))
            .collect();
        let shifted: Vec<(String, f64)> = spikes
            .iter()
            .map(|(s, t)| {
                let k = units.iter().position(|u| *u == s).unwrap();
                (s.clone(), (t + offsets[k]) % SPAN_S)
            })
            .collect();
        found.push(run(&spike_csv(&shifted), &layout_csv(&layout)).bursts.len());
    }
    eprintln!("network bursts in 10 time-shifted copies of the real recording: {found:?}");
    assert!(found.iter().all(|&n| n == 0), "{found:?}");
}

#[test]
fn fronts_added_to_real_firing_are_measured() {
    let (mut spikes, layout) = real();
    let mut rng = ChaCha8Rng::seed_from_u64(21);
    let latency = LogNormal::new(0.002f64.ln(), 0.5).unwrap();
    let speed_spread = LogNormal::new(50f64.ln(), 0.15).unwrap();
    // (start, speed, unit vector of travel)
    let mut truth: Vec<(f64, f64, [f64; 2])> = Vec::new();
    let mut t = 1.0;
    while t < SPAN_S - 2.0 {
        let speed = speed_spread.sample(&mut rng);
        let a = rng.random_range(0.0..std::f64::consts::TAU);
        let dir = [a.cos(), a.sin()];
        let first = layout
            .iter()
            .map(|r| r.1 * dir[0] + r.2 * dir[1])
            .fold(f64::INFINITY, f64::min);
        for (unit, x, y) in &layout {
            if rng.random_bool(0.05) {
                continue;
            }
            let arrival = t + (x * dir[0] + y * dir[1] - first) / (speed * 1e3);
            let s0 = arrival + latency.sample(&mut rng);
            spikes.push((unit.clone(), s0));
            for _ in 1..rng.random_range(1..=3) {
                spikes.push((unit.clone(), s0 + rng.random_range(0.0..0.15)));
            }
        }
        truth.push((t, speed, dir));
        t += 2.5 + rng.random_range(0.0..1.5);
    }
    spikes.retain(|s| s.1 < SPAN_S);
    if let Ok(dir) = std::env::var("REGIME_DUMP") {
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(format!("{dir}/hybrid.spikes.csv"), spike_csv(&spikes)).unwrap();
        std::fs::write(format!("{dir}/hybrid.layout.csv"), layout_csv(&layout)).unwrap();
    }
    let a = run(&spike_csv(&spikes), &layout_csv(&layout));
    let (mut reported, mut covered, mut direction_right) = (0, 0, 0);
    let mut errors = Vec::new();
    for (start, speed, dir) in &truth {
        let Some(b) = a
            .bursts
            .iter()
            .find(|b| b.start_s - 0.3 <= *start && *start <= b.end_s)
        else {
            continue;
        };
        let Some(f) = &b.front else {
            eprintln!("  no front at {start:.2} s: {:?}", b.no_front_reason);
            continue;
        };
        if f.direction_xy.is_none() {
            eprintln!(
                "  {start:.2} s: {} at {:.1} mm/s (true {speed:.1})",
                f.model, f.speed_mm_s
            );
        }
        reported += 1;
        errors.push((f.speed_mm_s / speed - 1.0).abs());
        covered += usize::from(f.speed_ci95_mm_s[0] <= *speed && *speed <= f.speed_ci95_mm_s[1]);
        direction_right += usize::from(
            f.direction_xy
                .is_some_and(|d| d[0] * dir[0] + d[1] * dir[1] > 25f64.to_radians().cos()),
        );
    }
    errors.sort_by(f64::total_cmp);
    let median = errors.get(errors.len() / 2).copied().unwrap_or(f64::NAN);
    let coverage = covered as f64 / reported.max(1) as f64;
    eprintln!(
        "fronts added to the real recording: {} added, {} bursts found, {reported} fronts reported; median |speed error| {:.2}%; direction right {direction_right}; 95% CI coverage {:.1}%",
        truth.len(),
        a.bursts.len(),
        median * 100.0,
        coverage * 100.0
    );
    assert!(reported as f64 >= 0.95 * truth.len() as f64);
    assert!(median < 0.03);
    assert!(direction_right as f64 >= 0.95 * reported as f64);
    assert!((0.90..=0.98).contains(&coverage), "coverage {coverage}");
}

/// Rhythm and synchrony on the real units. With every unit shifted by its own random offset
/// (independent units, each keeping its own bursting), the mean STTC over all pairs is near
/// 0 (its expectation for independent trains, Cutts & Eglen 2014) and the population rate
/// shows no rhythm; and the real recording's STTC matrix is unchanged, pair by pair, when
/// the whole recording is shifted by a day (CHECK-VALUES.md).
#[test]
fn synchrony_and_rhythm_on_the_real_units() {
    use ringline::rhythm::spectrum::{rate_spectrum, SpectrumSettings};
    use ringline::synchrony::sttc_matrix;
    let (spikes, layout) = real();
    let trains_of = |spikes: &[(String, f64)]| -> Vec<Vec<f64>> {
        layout
            .iter()
            .map(|(u, _, _)| {
                let mut t: Vec<f64> = spikes.iter().filter(|s| &s.0 == u).map(|s| s.1).collect();
                t.sort_by(f64::total_cmp);
                t
            })
            .collect()
    };
    let dt = 0.05;
    let span = (0.0, SPAN_S);
    let trains = trains_of(&spikes);
    let refs: Vec<&[f64]> = trains.iter().map(Vec::as_slice).collect();
    let real = sttc_matrix(&refs, span, dt).unwrap();
    let day = 86_400.0;
    let later: Vec<Vec<f64>> = trains
        .iter()
        .map(|t| t.iter().map(|x| x + day).collect())
        .collect();
    let later_refs: Vec<&[f64]> = later.iter().map(Vec::as_slice).collect();
    let shifted_day = sttc_matrix(&later_refs, (day, day + SPAN_S), dt).unwrap();
    for (a, b) in real.iter().zip(shifted_day.iter()) {
        match (a, b) {
            (Some(x), Some(y)) => assert!((x - y).abs() < 1e-9, "{x} against {y}"),
            _ => assert_eq!(a, b),
        }
    }

    let mut rng = ChaCha8Rng::seed_from_u64(14288);
    let mut means = Vec::new();
    for _ in 0..5 {
        let offsets: Vec<f64> = layout
            .iter()
            .map(|_| rng.random_range(0.0..SPAN_S))
            .collect();
        let shuffled: Vec<Vec<f64>> = trains
            .iter()
            .zip(&offsets)
            .map(|(t, o)| {
                let mut s: Vec<f64> = t.iter().map(|x| (x + o) % SPAN_S).collect();
                s.sort_by(f64::total_cmp);
                s
            })
            .collect();
        let refs: Vec<&[f64]> = shuffled.iter().map(Vec::as_slice).collect();
        let m = sttc_matrix(&refs, span, dt).unwrap();
        let values: Vec<f64> = (0..refs.len())
            .flat_map(|i| (i + 1..refs.len()).map(move |j| (i, j)))
            .filter_map(|(i, j)| m[[i, j]])
            .collect();
        means.push(values.iter().sum::<f64>() / values.len() as f64);
        let spectrum = rate_spectrum(&shuffled, span, &SpectrumSettings::default()).unwrap();
        assert!(!spectrum.is_rhythm, "{spectrum:?}");
    }
    eprintln!("mean STTC of independently shifted real units: {means:?}");
    assert!(means.iter().all(|m| m.abs() < 0.05), "{means:?}");
}
