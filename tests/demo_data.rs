//! The demo recordings regenerate byte for byte from their scenarios, and the kinematic
//! simulator keeps to its own definition (front arrival t0 + d / v; Poisson background).

#![allow(clippy::unwrap_used, clippy::expect_used)] // a failed unwrap is a failed test

use ringline::simulate::{
    parse_scenario, simulate_fronts, simulation_files, ElectrodeLayout, FrontScenario, Scenario,
};
use std::path::PathBuf;

fn demo_dir() -> PathBuf {
    PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/../demo-data"))
}

#[test]
fn demo_recordings_regenerate_byte_for_byte() {
    let scenarios = std::fs::read_dir(demo_dir().join("scenarios")).unwrap();
    let mut checked = 0;
    for entry in scenarios {
        let path = entry.unwrap().path();
        let scenario = parse_scenario(&std::fs::read_to_string(&path).unwrap()).unwrap();
        let folder = match &scenario {
            Scenario::Fronts(s) => s.name.clone(),
            Scenario::Network(s) => s.name.clone(),
        };
        for (name, content) in simulation_files(&scenario, &mut |_, _, _| {})
            .unwrap()
            .files
        {
            let committed =
                std::fs::read(demo_dir().join(&folder).join(&name)).unwrap_or_else(|_| {
                    panic!("{folder}/{name} is missing; run scripts/make-demo-data")
                });
            assert!(
                committed == content,
                "{folder}/{name} differs from a fresh simulation; run scripts/make-demo-data"
            );
            checked += 1;
        }
    }
    assert!(
        checked >= 9,
        "expected three demo recordings of three files, checked {checked}"
    );
}

#[test]
fn the_demo_study_manifest_names_files_that_exist() {
    let text = std::fs::read(demo_dir().join("blocker-series.csv")).unwrap();
    let manifest = ringline::import::read_manifest(
        &text,
        "blocker-series.csv",
        ringline::import::ImportLimits::default(),
    )
    .unwrap();
    assert_eq!(manifest.rows.len(), 4);
    for row in &manifest.rows {
        for file in [&row.data, &row.layout, row.stimuli.as_ref().unwrap()] {
            assert!(demo_dir().join(file).is_file(), "{file}");
        }
    }
}

fn quiet_row() -> FrontScenario {
    FrontScenario {
        name: "check".into(),
        seed: 7,
        duration_s: 100.0,
        electrodes: ElectrodeLayout::Row {
            count: 10,
            pitch_um: 250.0,
            angle_deg: 30.0,
        },
        pattern: ringline::simulate::FrontPattern::OneWay,
        position_jitter_um: 0.0,
        min_interval_s: 5.0,
        extra_interval_s: 1.0,
        speed_mm_s: 50.0,
        speed_cv: 0.0,
        activation_jitter_s: 0.0,
        spikes_per_burst: 1.0,
        burst_spread_s: 0.0,
        background_rate_hz: 0.0,
        dead_electrodes: vec![],
        failure_probability: 0.0,
        sampling_rate_hz: 1e9,
    }
}

/// Without jitter every electrode fires at t0 + d / v, d measured from the entry end along
/// the travel direction (the definition of a constant-speed front).
#[test]
fn fronts_arrive_at_distance_over_speed() {
    let sim = simulate_fronts(&quiet_row()).unwrap();
    assert!(sim.truth.bursts.len() >= 10);
    for burst in &sim.truth.bursts {
        let d = burst.direction_xy.unwrap();
        for (site, t) in sim.sites.iter().zip(&burst.activation_s) {
            let Some(t) = t else { continue };
            let distance =
                (site.x_um - burst.origin_um[0]) * d[0] + (site.y_um - burst.origin_um[1]) * d[1];
            let expected = burst.start_s + distance / (burst.speed_mm_s * 1e3);
            assert!((t - expected).abs() < 1e-9, "{t} s against {expected} s");
        }
    }
}

/// Background only: counts per electrode are Poisson with mean rate x duration; each count
/// must lie within 4.5 standard deviations (sqrt of the mean) of it.
#[test]
fn background_is_poisson_at_the_given_rate() {
    let scenario = FrontScenario {
        min_interval_s: 1e6,
        background_rate_hz: 2.0,
        duration_s: 500.0,
        ..quiet_row()
    };
    let sim = simulate_fronts(&scenario).unwrap();
    let mean = 2.0 * 500.0;
    let total: usize = sim.spikes.iter().map(|s| s.times_s.len()).sum();
    for s in &sim.spikes {
        let n = s.times_s.len() as f64;
        assert!(
            (n - mean).abs() < 4.5 * mean.sqrt(),
            "{}: {n} spikes, mean {mean}",
            s.site
        );
    }
    let n_all = total as f64;
    let mean_all = mean * sim.spikes.len() as f64;
    assert!((n_all - mean_all).abs() < 4.5 * mean_all.sqrt());
}

#[test]
fn bad_scenarios_name_the_field() {
    let bad = FrontScenario {
        speed_mm_s: -1.0,
        ..quiet_row()
    };
    assert!(simulate_fronts(&bad).unwrap_err().starts_with("speed_mm_s"));
    let bad = FrontScenario {
        dead_electrodes: vec![10],
        ..quiet_row()
    };
    assert!(simulate_fronts(&bad).unwrap_err().contains("electrode 10"));
    assert!(parse_scenario("{\"model\": \"fronts\", \"name\": 3}").is_err());
}
